"""Plain-words notices that every view and output of estimates carries."""

ESTIMATE_NOTICE = (
    "These figures are estimates from logged loads and case-drain trends. The maker's "
    "service limits, local codes and qualified technicians decide when a pump or motor "
    "is rebuilt. Pressurised hydraulic systems are dangerous: isolate and relieve all "
    "pressure before any work, and leave it to trained people."
)
"""The notice under every status table, unit report and ranking."""
