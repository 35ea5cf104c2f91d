"""Pieces every page shares: the sidebar (as-of date, reliability, cautions), status
chips and the readable form of the fleet table.
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from datetime import date

import pandas as pd
import streamlit as st

from dashboards import charts, data
from monitor.domain.notices import ESTIMATE_NOTICE
from monitor.domain.vocabulary import (
    FLAG_WORDS,
    LIMIT_REACHED,
    NEW_LIFE,
    NO_ESTIMATE,
    STATUS_BANDS,
    plural,
)

CAUTION = ESTIMATE_NOTICE
"""The safety notice: one wording on every page, in the CLI and in every export."""

CHIP_BACKGROUND = "#F5F7F9"
MUTED_TEXT = "#3E4A56"
ATTENTION_BANDS = STATUS_BANDS[:2]
"""Status bands listed in the fleet page's attention list."""

RELIABILITY_CHOICES = (90.0, 95.0, 96.0, 97.0, 98.0, 99.0, 99.5, 99.9, 99.95)
"""Offered planning reliabilities [%] (ISO 281:2007 gives a1 for 90-99.95 %)."""

TABLE_COLUMNS = {
    "unit": "Unit",
    "status": "Status",
    "flags": "Flags",
    "due_date": "Due date",
    "remaining_h": "Remaining [h]",
    "position": "Loop",
    "site": "Site",
    "limiting": "Limited by",
    "consumed_fraction": "Life used [%]",
    "machine_type": "Machine type",
    "component_model": "Model",
    "case_drain_level_lpm": "Case drain [L/min]",
    "case_drain_limit_lpm": "Drain limit [L/min]",
    "drain_to_limit": "Drain vs limit [%]",
    "utilisation_h_per_day": "Use [h/day]",
    "data_age_days": "Data age [days]",
}
"""Columns of the fleet table as shown (source column -> heading with unit)."""


@dataclass(frozen=True)
class Context:
    """What every page reads from the sidebar."""

    url: str | None
    as_of: date
    reliability_pct: float


def sidebar() -> Context:
    """Draw the shared sidebar (call once per run, before the page) and return its values."""
    url = data.db_url()
    stored = data.settings(url)
    default_r = float(stored.get("reliability_pct", 90.0))
    choices = sorted(set(RELIABILITY_CHOICES) | {default_r})
    with st.sidebar:
        st.markdown("#### Planning basis")
        as_of = st.date_input(
            "As-of date", value=date.today(), key="as_of", format="YYYY-MM-DD",
            help="Data up to the start of this day count; due dates are counted from it.",
        )  # fmt: skip
        reliability = st.select_slider(
            "Planning reliability [%]", options=choices, value=default_r, key="reliability_pct",
            help="Chance that a bearing survives the estimated hours (ISO 281 factor a1). "
            "Higher reliability gives fewer hours.",
        )  # fmt: skip
        st.divider()
        st.warning(CAUTION, icon=":material/warning:")
    return Context(url, as_of, float(reliability))


def caution_banner() -> None:
    """The safety notice at the top of every page (visible without opening the sidebar)."""
    st.caption(f":material/warning: {CAUTION}")


def context() -> Context:
    """The sidebar values of this run (for pages)."""
    state = st.session_state
    return Context(
        data.db_url(), state.get("as_of", date.today()), float(state.get("reliability_pct", 90.0))
    )


def status_chips(fleet: pd.DataFrame) -> str:
    """HTML row of status counts: a coloured marker, the band name and the count."""
    counts = charts.status_count_frame(fleet)
    chips = []
    for band, n in zip(counts["status"], counts["count"], strict=True):
        colour = charts.status_colour(band)
        chips.append(
            f'<div class="ds-chip" style="border-left:6px solid {colour}">'
            f'<span class="ds-n" style="color:{colour}">{int(n)}</span>'
            f'<span class="ds-band">{html.escape(status_label(band))}</span></div>'
        )
    stale = _stale_units(fleet)
    chips.append(
        '<div class="ds-chip" style="border-left:6px dotted #3E4A56">'
        f'<span class="ds-n">{stale}</span><span class="ds-band">'
        f"{'unit' if stale == 1 else 'units'} with stale data</span></div>"
    )
    return (
        "<style>.ds-row{display:flex;gap:10px;flex-wrap:wrap;margin:4px 0 8px}"
        f".ds-chip{{background:{CHIP_BACKGROUND};padding:6px 14px 6px 10px;border-radius:4px;"
        "min-width:100px}.ds-n{font-size:1.5rem;font-weight:600;margin-right:8px}"
        f".ds-band{{color:{MUTED_TEXT}}}</style>"
        f'<div class="ds-row" data-testid="ds-counts">{"".join(chips)}</div>'
    )


def _stale_units(fleet: pd.DataFrame) -> int:
    stale = fleet["flags"].map(lambda f: isinstance(f, (list, tuple)) and "stale" in f)
    return int(fleet.loc[stale.astype(bool), "unit"].nunique())


def status_label(status: object, hours_since_rebuild: object = None) -> str:
    """Status text with a marker whose shape differs by urgency (readable without colour);
    a drive with no hours since its rebuild reads "new life, no estimate yet"."""
    key = charts.status_key(status)
    marks = ("■■■", "■■□", "■□□", "□□□")
    rank = charts.status_rank(key)
    if key == NO_ESTIMATE and hours_since_rebuild is not None and not hours_since_rebuild:
        key = NEW_LIFE
    return f"{marks[rank] if rank < len(marks) else '–––'} {key}"


def hours_text(value: object) -> str:
    """Whole hours with thousands separators; used up reads "limit reached"; none "–"."""
    if value is None or pd.isna(value):
        return "–"
    return LIMIT_REACHED if float(value) <= 0 else f"{float(value):,.0f}"


def _reason(row: pd.Series) -> str:
    """One line on why a drive needs action."""
    what = "case-drain wear" if row["limiting"] == "wear" else "bearing fatigue"
    left = hours_text(row["remaining_h"])
    left = left if left == LIMIT_REACHED else f"{left} h left"
    use = row["utilisation_h_per_day"]
    rate = f" at {use:.1f} h/day" if use is not None and pd.notna(use) else ""
    return f"{what}: {left}{rate}"


def attention_frame(fleet: pd.DataFrame) -> pd.DataFrame:
    """The drives that need action (act now, due soon), most urgent first: unit, loop,
    status, a one-line reason and the due date."""
    need = fleet[fleet["status"].map(charts.status_key).isin(ATTENTION_BANDS)]
    return pd.DataFrame(
        {
            "Unit": need["unit"].astype(str),
            "Loop": need["position"].astype(str),
            "Status": [status_label(s) for s in need["status"]],
            "Flags": need["flags"].map(_flag_text),
            "Why": [_reason(r) for _, r in need.iterrows()],
            "Due date": [_date_text(d) or "–" for d in need["due_date"]],
        }
    )


def attention_html(fleet: pd.DataFrame) -> str:
    """The attention list as a compact HTML table (reads on a phone, no sideways scroll)."""
    frame = attention_frame(fleet)
    stale = _stale_units(fleet)
    head = (
        f"<b>Needs action: {plural(len(frame), 'drive')}</b> ({' or '.join(ATTENTION_BANDS)}, "
        f"whole fleet) · {plural(stale, 'unit')} with stale data"
    )
    if frame.empty:
        return f'<div class="ds-att">{head}. Nothing needs action.</div>'
    rows = []
    for r in frame.itertuples(index=False):
        colour = charts.status_colour(r.Status.split(" ", 1)[1])
        flags = f" · {html.escape(r.Flags)}" if r.Flags else ""
        rows.append(
            f"<tr><td><b>{html.escape(r.Unit)}</b> {html.escape(r.Loop)}</td>"
            f'<td style="color:{colour};font-weight:600">{html.escape(r.Status)}</td>'
            f"<td>{html.escape(r.Why)}{flags}</td><td>{html.escape(r[5])}</td></tr>"
        )
    return (
        "<style>.ds-att table{border-collapse:collapse;width:100%;font-size:0.92rem}"
        ".ds-att td,.ds-att th{padding:3px 8px;border-bottom:1px solid #E3E7EB;"
        "text-align:left;vertical-align:top}.ds-att th{color:#3E4A56}</style>"
        f'<div class="ds-att" data-testid="ds-attention"><p>{head}</p><table>'
        "<tr><th>Unit, loop</th><th>Status</th><th>Why</th><th>Due</th></tr>"
        f"{''.join(rows)}</table></div>"
    )


def table_frame(fleet: pd.DataFrame) -> pd.DataFrame:
    """The fleet table as shown: readable flags, status marks, drain/limit ratio."""
    df = fleet.copy()
    limit = pd.to_numeric(df["case_drain_limit_lpm"], errors="coerce")
    level = pd.to_numeric(df["case_drain_level_lpm"], errors="coerce")
    df["drain_to_limit"] = (100 * level / limit).clip(lower=0, upper=100)
    df["consumed_fraction"] = 100 * pd.to_numeric(df["consumed_fraction"], errors="coerce")
    df["status"] = [
        status_label(s, h) for s, h in zip(df["status"], df["hours_since_rebuild"], strict=True)
    ]
    df["remaining_h"] = df["remaining_h"].map(hours_text)
    for col, pattern in _NUMBER_FORMATS.items():  # as text: a gap reads "–", never "None"
        values = pd.to_numeric(df[col], errors="coerce")
        df[col] = [pattern % v if pd.notna(v) else "–" for v in values]
    df["limiting"] = df["limiting"].fillna("–")
    df["flags"] = df["flags"].map(_flag_text)
    df["due_date"] = [_date_text(d) for d in df["due_date"]]
    return df[list(TABLE_COLUMNS)]


def _date_text(value: object) -> str:
    if value is None or pd.isna(value):
        return ""
    return pd.Timestamp(value).date().isoformat()


def _flag_text(flags: object) -> str:
    if flags is None or isinstance(flags, float):
        return ""
    return ", ".join(FLAG_WORDS.get(f, str(f)) for f in flags)


_NUMBER_FORMATS = {
    "case_drain_level_lpm": "%.2f",
    "case_drain_limit_lpm": "%.2f",
    "utilisation_h_per_day": "%.1f",
    "data_age_days": "%.1f",
}


def column_config() -> dict:
    """st.dataframe column settings for :func:`table_frame`."""
    cc = st.column_config
    config: dict = dict(TABLE_COLUMNS)
    config |= {k: cc.TextColumn(TABLE_COLUMNS[k]) for k in _NUMBER_FORMATS}
    config["unit"] = cc.TextColumn(TABLE_COLUMNS["unit"], pinned=True)
    config["due_date"] = cc.TextColumn(
        TABLE_COLUMNS["due_date"], help="Empty: no recent operating hours, so no date"
    )
    config["status"] = cc.TextColumn(TABLE_COLUMNS["status"], pinned=True)
    config["consumed_fraction"] = cc.ProgressColumn(
        TABLE_COLUMNS["consumed_fraction"], min_value=0.0, max_value=100.0, format="%.1f %%",
        help="Share of the rated bearing life (L10 at the planning reliability) used since "
        "the last rebuild",
    )  # fmt: skip
    config["drain_to_limit"] = cc.ProgressColumn(
        TABLE_COLUMNS["drain_to_limit"], min_value=0.0, max_value=100.0, format="%.1f %%",
        help="Fitted case-drain level now as a share of the model's rebuild limit",
    )  # fmt: skip
    return config


SETTING_WORDS = {
    "overdue_h": f"'{STATUS_BANDS[0]}' limit",
    "due_h": f"'{STATUS_BANDS[1]}' limit",
    "plan_h": f"'{STATUS_BANDS[2]}' limit",
}
"""The stored names of the status limits and the words the settings page shows."""


def setting_words(message: str) -> str:
    """A settings message with the status-band words instead of internal names."""
    for name, words in SETTING_WORDS.items():
        message = message.replace(name, words)
    return message


def show_error(message: str, problems: tuple = ()) -> None:
    """A domain error as a red box with its problems listed."""
    lines = [f"- {html.escape(str(p))}" for p in problems]
    st.error("\n".join([message, *lines]))


def options(fleet: pd.DataFrame, column: str) -> list[str]:
    """Sorted distinct non-empty values of a column (for filter boxes)."""
    return sorted({str(v) for v in fleet[column].dropna() if str(v)})


def status_options(fleet: pd.DataFrame) -> list[str]:
    """Status bands present in the fleet, most urgent first."""
    return sorted(set(fleet["status"].map(charts.status_key)), key=charts.status_rank)


def filter_fleet(
    fleet: pd.DataFrame,
    sites: list[str] | None = None,
    bands: list[str] | None = None,
    machine_types: list[str] | None = None,
    models: list[str] | None = None,
    search: str = "",
) -> pd.DataFrame:
    """Rows matching every given filter (empty filter: no restriction); order kept.

    ``search`` matches part of the unit tag, ignoring case.
    """
    keep = pd.Series(True, index=fleet.index)
    for column, wanted in (("site", sites), ("machine_type", machine_types),
                           ("component_model", models)):  # fmt: skip
        if wanted:
            keep &= fleet[column].astype(str).isin(wanted)
    if bands:
        keep &= fleet["status"].map(charts.status_key).isin(bands)
    if search and search.strip():
        keep &= fleet["unit"].astype(str).str.contains(search.strip(), case=False, regex=False)
    return fleet[keep]


def export_frame(fleet: pd.DataFrame) -> pd.DataFrame:
    """The fleet table for download: every status column, flags as text, no lists."""
    out = fleet.copy()
    out["flags"] = out["flags"].map(lambda f: ";".join(f) if isinstance(f, (list, tuple)) else "")
    return out


def status_row(status: pd.DataFrame, position: str) -> pd.Series | None:
    """The fleet-status row of one position of a unit, or None."""
    rows = status[status["position"] == position]
    return rows.iloc[0] if len(rows) else None


def model_caption(model: object) -> str:
    """One line of rating data of a component model."""
    parts = [
        f"{model.name} ({model.kind})",
        f"{model.displacement_cm3:g} cm³/rev",
        f"L10 {model.rated_l10_h:,.0f} h at {model.rated_dp_bar:g} bar, "
        f"{model.rated_speed_rpm:,.0f} rpm",
        f"relief {model.relief_bar:g} bar",
    ]
    if model.cutoff_bar is not None:
        parts.append(f"cut-off {model.cutoff_bar:g} bar")
    return " · ".join(parts)


def trend_line(detail: object, row: pd.Series | None) -> tuple[pd.DataFrame | None, float | None]:
    """The Theil–Sen line with its band over this life's readings, and the hour meter at
    which the fitted level reaches the limit (None without a positive trend)."""
    trend = getattr(detail, "trend", None)
    readings = detail.case_drain
    if trend is None or readings.empty or pd.isna(trend.slope):
        return None, None
    used = readings[readings["used"].astype(bool)] if "used" in readings else readings
    if "off_reference" in used:
        used = used[~used["off_reference"].astype(bool)]
    used = used.dropna(subset=["hour_meter", "normalised_lpm"])
    if used.empty:
        return None, None
    now = float(row["hour_meter"]) if row is not None and pd.notna(row["hour_meter"]) else None
    now = now if now is not None else float(used["hour_meter"].max())
    crossing = now + trend.remaining_h if pd.notna(trend.remaining_h) else None
    x_to = max(now, crossing if crossing is not None and crossing < now + 20000 else now)
    line = charts.trend_frame(
        trend.slope, trend.intercept, trend.slope_low, trend.slope_high,
        float(used["hour_meter"].median()), float(used["normalised_lpm"].median()),
        float(used["hour_meter"].min()), x_to,
    )  # fmt: skip
    return line, crossing


def results_frame(results: list) -> pd.DataFrame:
    """One row per uploaded file: name, result, what was stored, problem count."""
    return pd.DataFrame(
        {
            "File": [r.name for r in results],
            "Result": [r.status for r in results],
            "Kind": [r.kind for r in results],
            "Histograms stored": [r.histograms for r in results],
            "Readings stored": [r.readings for r in results],
            "Problems": [len(r.problems) for r in results],
            "Summary": [r.summary for r in results],
        }
    )


def problems_frame(problems: tuple) -> pd.DataFrame:
    """The problems of a rejected file: line, column, value and what is expected."""
    return pd.DataFrame(
        {
            "Line": pd.array([p.line for p in problems], dtype="Int64"),
            "Column": [p.column or "" for p in problems],
            "Value": [p.value or "" for p in problems],
            "Problem": [p.message for p in problems],
        }
    )


def summary_markdown(lines: list[str]) -> str:
    """The unit summary as a bullet list; indented sentences become sub-points."""
    if not lines:
        return "No data yet."
    out = []
    for line in lines:
        indent = "    " if line.startswith("  ") else ""
        out.append(f"{indent}- {line.strip()}")
    return "\n".join(out)


_LABELS = {
    "suggested_level": "Level suggested (ISO 281)",
    "band_pressure": "Band pressure",
    "oil_temp_c": "Oil temperature [°C]",
    "oil_factor_source": "Oil temperature from",
    "contamination_level": "Contamination level (ISO 281)",
    "contamination_ec": "eC [-]",
    "kappa_floor_hours": "Hours at the aISO floor [h]",
    "life_before_data": "Life before first upload",
    "taken_at": "Taken at (UTC)",
    "iso4406": "ISO 4406 code",
    "r4": "≥ 4 µm(c)",
    "r6": "≥ 6 µm(c)",
    "r14": "≥ 14 µm(c)",
    "at": "When (UTC)",
    "position": "Position",
    "kind": "Event",
    "hour_meter": "Hour meter [h]",
    "new_hour_meter": "New hour meter [h]",
    "note": "Note",
    "period_start": "From (UTC)",
    "period_end": "To (UTC)",
    "hour_meter_start": "Hour meter from [h]",
    "hour_meter_end": "Hour meter to [h]",
    "file": "File",
    "setting": "Above setting",
    "start_s": "Start [s]",
    "duration_s": "Duration [s]",
    "peak_bar": "Peak [bar]",
    "peak_s": "Peak at [s]",
    "rise_rate_bar_per_s": "Rise rate [bar/s]",
    "reason": "Reason",
}


def readable(frame: pd.DataFrame) -> pd.DataFrame:
    """A detail table for showing: text gaps empty instead of "None" (numbers stay numbers,
    their gaps are left blank by the table)."""
    out = frame.copy()
    for col in out.columns:
        if out[col].dtype == object or out[col].isna().all():
            out[col] = out[col].astype(object).map(lambda v: "" if _missing(v) else v)
    return out


def _missing(value: object) -> bool:
    return (
        value is None
        or value is pd.NA
        or value is pd.NaT
        or (isinstance(value, float) and value != value)
    )


def labels(frame: pd.DataFrame) -> dict:
    """Readable headings (with units) for the unit page's tables; times to the minute."""
    cc = st.column_config
    out: dict = {}
    for col in frame.columns:
        label = _LABELS.get(col, col)
        if pd.api.types.is_datetime64_any_dtype(frame[col]):
            out[col] = cc.DatetimeColumn(label, format="YYYY-MM-DD HH:mm")
        elif col.startswith("hour_meter") or col.startswith("new_hour_meter"):
            out[col] = cc.NumberColumn(label, format="%,.1f")
        else:
            out[col] = label
    return out
