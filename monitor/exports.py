"""Export tables and rebuild plans as CSV, XLSX and iCalendar bytes.

No database access: every function takes a DataFrame or a :class:`~monitor.planning.Plan`
and returns ``bytes`` that the caller writes to a file, a download button or a response.

Spreadsheet safety: a text cell that begins with ``=``, ``+``, ``-``, ``@`` (or a tab or
carriage return), also after leading blanks (spreadsheet programs skip them), could be
run as a formula when the file is opened in a spreadsheet program, so such cells are
prefixed with a single quote ``'`` in CSV and XLSX output,
and XLSX text cells are always stored as strings, never as formulas (OWASP, "CSV
Injection", common practice).

The iCalendar text is written here to RFC 5545 (Internet Calendaring and Scheduling
Core Object Specification, 2009): CRLF line ends (section 3.1), lines folded at 75
octets without splitting a UTF-8 character (3.1), TEXT escaping of backslash,
semicolon, comma and newline (3.3.11), all-day events as ``VALUE=DATE`` (3.3.4), and
``UID``/``DTSTAMP`` in every event (3.6.1).
"""

from __future__ import annotations

import hashlib
import io
import math
import re
from collections.abc import Mapping
from datetime import UTC, date, datetime, timedelta

import numpy as np
import pandas as pd
from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.styles import Font

from monitor.planning import ESTIMATE_NOTICE, Plan, not_placed_frame, plan_summary

FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
"""Leading characters that make a spreadsheet treat a text cell as a formula."""

_BLANKS = " \u00a0\u3000\n\x0b\x0c"
"""Blanks a spreadsheet program may skip before a formula (space, no-break space,
ideographic space, line feed, vertical tab, form feed; tab and CR are triggers)."""

PLAN_FORMATS = ("csv", "xlsx", "ics")
"""Formats :func:`plan_export_bytes` can write."""

_ILLEGAL_XML = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_BAD_SHEET_CHARS = set("[]:*?/\\")
_WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")


# --- CSV and XLSX ---------------------------------------------------------------------------


def neutralise_text(value: object) -> object:
    """Prefix a formula-like text value with ``'``; other values pass unchanged.

    Parameters
    ----------
    value : object
        A cell value.

    Returns
    -------
    object
        ``"'" + value`` when ``value`` is a ``str`` that starts with one of
        :data:`FORMULA_TRIGGERS`, or whose first character that is not a blank is one,
        else ``value``.
    """
    if isinstance(value, str) and (
        value.startswith(FORMULA_TRIGGERS) or value.lstrip(_BLANKS).startswith(FORMULA_TRIGGERS)
    ):
        return "'" + value
    return value


def neutralise_frame(df: pd.DataFrame) -> pd.DataFrame:
    """Copy of ``df`` with formula-like text cells and column names neutralised."""
    if not isinstance(df, pd.DataFrame):
        raise ValueError(f"expected a pandas DataFrame, got {type(df).__name__}")
    out = df.copy()
    for col in out.columns:
        if not (pd.api.types.is_numeric_dtype(out[col]) or pd.api.types.is_bool_dtype(out[col])):
            out[col] = out[col].astype(object).map(neutralise_text)
    out.columns = [neutralise_text(str(c)) for c in out.columns]
    return out


def frame_to_csv_bytes(df: pd.DataFrame, *, index: bool = False) -> bytes:
    """Write a table as UTF-8 CSV with formula-like text neutralised.

    Parameters
    ----------
    df : pandas.DataFrame
        Any table (plan assignments, ranking ...). Dates are written ISO 8601,
        missing values as empty fields.
    index : bool, default False
        Also write the index.

    Returns
    -------
    bytes
        CSV text, comma-separated, CRLF line ends (RFC 4180).
    """
    safe = neutralise_frame(df)
    text = safe.to_csv(index=index, lineterminator="\r\n", date_format="%Y-%m-%d")
    return text.encode("utf-8")


def _check_sheet_name(name: str) -> str:
    if not isinstance(name, str) or not 1 <= len(name) <= 31:
        raise ValueError(f"sheet_name must be 1 to 31 characters, got {name!r}")
    bad = sorted(_BAD_SHEET_CHARS & set(name))
    if bad or name.startswith("'") or name.endswith("'"):
        raise ValueError(
            f"sheet_name {name!r} may not contain any of [ ] : * ? / \\ nor start or end "
            "with an apostrophe"
        )
    return name


def _xlsx_value(value: object) -> object:
    """Convert one cell to a value openpyxl stores faithfully (None for missing)."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, float) and math.isinf(value):
        return "inf" if value > 0 else "'-inf"
    if isinstance(value, pd.Timestamp):
        value = value.to_pydatetime()
    if isinstance(value, datetime) and value.tzinfo is not None:
        value = value.astimezone(UTC).replace(tzinfo=None)
    if isinstance(value, (bool, int, float, date)):
        return value
    return _ILLEGAL_XML.sub("\ufffd", str(neutralise_text(value)))


def _cell(ws: object, value: object, bold: bool = False) -> WriteOnlyCell:
    cell = WriteOnlyCell(ws, value=_xlsx_value(value))
    if isinstance(cell.value, str):
        cell.data_type = "s"  # text, never a formula
    elif isinstance(cell.value, datetime):
        cell.number_format = "yyyy-mm-dd hh:mm"
    elif isinstance(cell.value, date):
        cell.number_format = "yyyy-mm-dd"
    if bold:
        cell.font = Font(bold=True)
    return cell


def frames_to_xlsx_bytes(sheets: Mapping[str, pd.DataFrame]) -> bytes:
    """Write several tables into one workbook, one sheet each, in the given order.

    Parameters
    ----------
    sheets : Mapping[str, pandas.DataFrame]
        Sheet name (1-31 characters, none of ``[]:*?/\\``) to table.

    Returns
    -------
    bytes
        The .xlsx file. Text cells are strings (formula-like ones prefixed with
        ``'``), dates are date cells, missing values are empty cells.
    """
    if not sheets:
        raise ValueError("sheets is empty: give at least one sheet name and table")
    names = [_check_sheet_name(n) for n in sheets]
    if len({n.lower() for n in names}) != len(names):
        raise ValueError(f"sheet names must differ (ignoring case), got {names}")
    wb = Workbook(write_only=True)
    for name, df in sheets.items():
        if not isinstance(df, pd.DataFrame):
            raise ValueError(f"sheet {name!r}: expected a pandas DataFrame")
        ws = wb.create_sheet(title=name)
        ws.append([_cell(ws, str(c), bold=True) for c in df.columns])
        for row in df.itertuples(index=False, name=None):
            ws.append([_cell(ws, v) for v in row])
    buffer = io.BytesIO()
    wb.save(buffer)
    return buffer.getvalue()


def frame_to_xlsx_bytes(df: pd.DataFrame, sheet_name: str = "data") -> bytes:
    """Write one table as a one-sheet workbook (see :func:`frames_to_xlsx_bytes`)."""
    return frames_to_xlsx_bytes({sheet_name: df})


def plan_rows(plan: Plan) -> pd.DataFrame:
    """One row per drive the plan deals with: the planned rebuilds (``state`` planned,
    with the ISO week ``iso_week`` of the planned week), then every drive that could not
    be placed (``state`` says why, ``reason`` explains)."""
    s, a = plan.settings, plan.assignments
    planned = a.assign(
        state="planned", iso_week=[s.week_label(w).split(" ", 1)[0] for w in a["week"]]
    )
    rest = not_placed_frame(plan).rename(columns={"not_placed": "state"})
    cols = ["state", *planned.columns.drop("state")]
    if rest.empty:
        return planned[cols]
    return pd.concat([planned[cols], rest.reindex(columns=cols)], ignore_index=True)


def plan_to_csv_bytes(plan: Plan) -> bytes:
    """:func:`plan_rows` as CSV bytes: the rebuilds, then the drives not placed."""
    return frame_to_csv_bytes(plan_rows(plan))


def _settings_frame(plan: Plan) -> pd.DataFrame:
    s = plan.settings
    rows = [
        ("as-of date", s.as_of.isoformat()),
        ("horizon [weeks]", s.horizon_weeks),
        ("fleet-wide capacity [rebuilds/week]", s.capacity_per_week),
        ("pairing window [h]", "off" if s.pair_within_h is None else s.pair_within_h),
    ]
    rows += [(f"site capacity: {k} [rebuilds/week]", v) for k, v in s.site_capacity.items()]
    rows += [(f"exchange stock: {k} [units]", v) for k, v in s.exchange_stock.items()]
    rows += [(f"core turnaround: {k} [d]", v) for k, v in s.turnaround_days.items()]
    return pd.DataFrame(rows, columns=["setting", "value"])


def plan_to_xlsx_bytes(plan: Plan) -> bytes:
    """The whole plan as a workbook: a read-me sheet first, then one sheet per table."""
    readme = pd.DataFrame({"about this plan": plan_summary(plan)})
    return frames_to_xlsx_bytes(
        {
            "read me": readme,
            "settings": _settings_frame(plan),
            "rebuilds": plan.assignments,
            "late": plan.late,
            "unplanned": plan.unplanned,
            "unscheduled": plan.unscheduled,
            "weekly capacity": plan.capacity,
            "exchange stock": plan.stock,
        }
    )


# --- iCalendar (RFC 5545) -------------------------------------------------------------------


def ics_escape(text: str) -> str:
    """Escape a TEXT value (RFC 5545 section 3.3.11): ``\\ ; ,`` and newlines."""
    text = str(text).replace("\r\n", "\n").replace("\r", "\n")
    text = text.replace("\\", "\\\\").replace(";", "\\;").replace(",", "\\,")
    return text.replace("\n", "\\n")


def ics_fold(line: str) -> str:
    """Fold one content line at 75 octets with CRLF + space (RFC 5545 section 3.1).

    Never splits a UTF-8 character; the result ends with CRLF.
    """
    parts, current, size, limit = [], [], 0, 75
    for ch in line:
        n = len(ch.encode("utf-8"))
        if size + n > limit:
            parts.append("".join(current))
            current, size, limit = [], 0, 74  # continuation lines start with one space
        current.append(ch)
        size += n
    parts.append("".join(current))
    return "\r\n ".join(parts) + "\r\n"


def _event_day(week_start: date, weekday: int | None) -> date:
    if weekday is None:
        return week_start
    return week_start + timedelta(days=(weekday - week_start.weekday()) % 7)


def _member_line(row: pd.Series) -> str:
    due = "no due date" if row.due_date is None else f"due {row.due_date.isoformat()}"
    hours = "no estimate" if pd.isna(row.remaining_h) else f"{row.remaining_h:,.0f} h remaining"
    if row.late_days > 0:
        state = f"LATE by {row.late_weeks} week(s), {row.late_days} day(s) after the due date"
    else:
        state = "on time"
    return f"{row.position} ({row.component_model}): {due}, {hours}, {state}."


def _event_lines(group: pd.DataFrame, plan: Plan, weekday: int | None, stamp: str) -> list[str]:
    first = group.iloc[0]
    day = _event_day(max(first.week_start, plan.settings.as_of), weekday)
    positions = " + ".join(group.position)
    late = int(group.late_days.max())
    summary = f"Rebuild downtime {first.unit}: {positions}" + (f" (late {late} d)" if late else "")
    key = "|".join([plan.settings.as_of.isoformat(), first.unit, *sorted(group.position)])
    uid = f"{hashlib.sha256(key.encode('utf-8')).hexdigest()[:32]}@drivespan"
    description = "\n".join(
        [
            f"Unit {first.unit} at {first.site or 'no site'}: planned in week "
            f"{plan.settings.week_label(first.week)}.",
            *(_member_line(row) for _, row in group.iterrows()),
            *(f"Why: {r}" for r in group.reason),
            ESTIMATE_NOTICE,
        ]
    )
    return [
        "BEGIN:VEVENT",
        f"UID:{uid}",
        f"DTSTAMP:{stamp}",
        f"DTSTART;VALUE=DATE:{day:%Y%m%d}",
        f"DTEND;VALUE=DATE:{day + timedelta(days=1):%Y%m%d}",
        f"SUMMARY:{ics_escape(summary)}",
        f"DESCRIPTION:{ics_escape(description)}",
        "TRANSP:TRANSPARENT",
        "END:VEVENT",
    ]


def _not_placed_event(plan: Plan, stamp: str) -> list[str]:
    """One event on the as-of day listing the drives the plan could not place (none: [])."""
    rest = not_placed_frame(plan)
    if rest.empty:
        return []
    day = plan.settings.as_of
    n = len(rest)
    summary = f"Not placed in the rebuild plan: {n} drive{'s' if n != 1 else ''}"
    description = "\n".join(
        [f"{r.unit} {r.position} ({r.not_placed}): {r.reason}" for r in rest.itertuples()]
        + [ESTIMATE_NOTICE]
    )
    uid = hashlib.sha256(f"{day.isoformat()}|not placed".encode()).hexdigest()[:32]
    return [
        "BEGIN:VEVENT",
        f"UID:{uid}@drivespan",
        f"DTSTAMP:{stamp}",
        f"DTSTART;VALUE=DATE:{day:%Y%m%d}",
        f"DTEND;VALUE=DATE:{day + timedelta(days=1):%Y%m%d}",
        f"SUMMARY:{ics_escape(summary)}",
        f"DESCRIPTION:{ics_escape(description)}",
        "TRANSP:TRANSPARENT",
        "END:VEVENT",
    ]


def _check_ics_args(weekday: int | None, dtstamp: datetime | None) -> str:
    if weekday is not None and (
        isinstance(weekday, bool) or not isinstance(weekday, int) or not 0 <= weekday <= 6
    ):
        raise ValueError(
            f"weekday must be 0 (Monday) to 6 (Sunday) or None for the week start, got {weekday!r}"
        )
    if dtstamp is None:
        dtstamp = datetime.now(UTC)
    if not isinstance(dtstamp, datetime) or dtstamp.tzinfo is None:
        raise ValueError(f"dtstamp must be a timezone-aware datetime, got {dtstamp!r}")
    return dtstamp.astimezone(UTC).strftime("%Y%m%dT%H%M%SZ")


def plan_to_ics_bytes(
    plan: Plan,
    *,
    weekday: int | None = None,
    dtstamp: datetime | None = None,
    calendar_name: str = "drivespan rebuild plan (estimates)",
) -> bytes:
    """One all-day calendar event per planned downtime (a pair is one event).

    Parameters
    ----------
    plan : Plan
        A plan from :func:`monitor.planning.plan_rebuilds`.
    weekday : int or None, default None
        Put each event on this weekday of its planned week (0 = Monday ... 6 =
        Sunday, on or after the week start); ``None``: on the week start.
    dtstamp : datetime.datetime, optional
        Time the calendar was made (timezone-aware) [UTC]; default now.
    calendar_name : str
        Name shown by calendar programs (``X-WR-CALNAME``).

    Returns
    -------
    bytes
        UTF-8 iCalendar text (RFC 5545). Each event's summary names the unit and
        positions; its description gives due dates, remaining hours, lateness, why
        this week, and the notice that dates are estimates and that qualified
        technicians and the maker's service limits decide. Unplanned components
        have no event of their own: one event on the as-of day lists the drives that
        could not be placed, with why. The UID depends on the as-of date, unit and positions, so
        re-exporting the same plan updates rather than duplicates events.
    """
    stamp = _check_ics_args(weekday, dtstamp)
    lines = [
        "BEGIN:VCALENDAR",
        "VERSION:2.0",
        "PRODID:-//drivespan//rebuild plan//EN",
        "CALSCALE:GREGORIAN",
        "METHOD:PUBLISH",
        f"X-WR-CALNAME:{ics_escape(calendar_name)}",
    ]
    a = plan.assignments
    for _, group in a.groupby("downtime", sort=False):
        lines += _event_lines(group, plan, weekday, stamp)
    lines += _not_placed_event(plan, stamp)
    lines.append("END:VCALENDAR")
    return "".join(ics_fold(line) for line in lines).encode("utf-8")


def plan_export_bytes(plan: Plan, fmt: str, **options: object) -> bytes:
    """Export a plan in one of :data:`PLAN_FORMATS` (options go to the ICS writer)."""
    if fmt == "csv":
        return plan_to_csv_bytes(plan)
    if fmt == "xlsx":
        return plan_to_xlsx_bytes(plan)
    if fmt == "ics":
        return plan_to_ics_bytes(plan, **options)
    raise ValueError(f"fmt must be one of {', '.join(PLAN_FORMATS)}, got {fmt!r}")
