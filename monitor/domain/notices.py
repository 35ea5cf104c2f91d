"""Plain-words notices that every view and output of estimates carries (one wording for
the command line, every exported file and every dashboard page)."""

ESTIMATE_NOTICE = (
    "These figures are estimates from logged loads and case-drain trends; the "
    "maker's service limits, local codes and qualified technicians decide when a pump or "
    "motor is rebuilt. Pressurised hydraulic systems are dangerous: stored energy in "
    "accumulators, trapped pressure and raised loads can injure or kill. Before any work, "
    "lower or block the loads, stop the machine, relieve all pressure (accumulators "
    "included) and lock out and tag out the machine; leave the work to trained people."
)
"""The notice under every status table, unit report, ranking, plan and dashboard page."""
