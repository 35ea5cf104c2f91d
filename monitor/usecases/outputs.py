"""What the skins hand to a person: the plan's plain-words summary, and files to download
(CSV, XLSX, iCalendar) from :mod:`monitor.exports` and :mod:`monitor.planning`."""

from monitor.exports import (  # noqa: F401 - this module's interface
    frame_to_csv_bytes,
    plan_export_bytes,
    plan_rows,
    plan_to_csv_bytes,
    plan_to_ics_bytes,
    plan_to_xlsx_bytes,
)
from monitor.planning import (  # noqa: F401 - this module's interface
    ALL_SITES,
    ESTIMATE_NOTICE,
    not_placed_frame,
    plan_rebuilds,
    plan_summary,
)
