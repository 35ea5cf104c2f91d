"""Tests for monitor/exports.py: CSV, XLSX and iCalendar output of tables and plans.

Outside references: the files are read back with independent parsers - Python's
``csv`` module and pandas for CSV, ``openpyxl`` for XLSX, the ``icalendar`` package for
RFC 5545 - and the raw ICS bytes are checked against RFC 5545 section 3.1 (CRLF,
75-octet folding) and 3.3.11 (TEXT escaping). The spreadsheet formula triggers
(= + - @) follow the OWASP "CSV Injection" guidance (common practice).
"""

from __future__ import annotations

import csv
import io
import zipfile
from datetime import UTC, date, datetime, timedelta

import icalendar
import openpyxl
import pandas as pd
import pytest

from monitor.exports import (
    frame_to_csv_bytes,
    frame_to_xlsx_bytes,
    frames_to_xlsx_bytes,
    ics_escape,
    ics_fold,
    neutralise_text,
    plan_export_bytes,
    plan_to_csv_bytes,
    plan_to_ics_bytes,
    plan_to_xlsx_bytes,
)
from monitor.planning import STATUS_COLUMNS, plan_rebuilds

AS_OF = date(2026, 3, 2)  # invented as-of date (a Monday)
STAMP = datetime(2026, 3, 2, 7, 30, tzinfo=UTC)
NASTY = ["=1+1", "+SUM(A1:A2)", "-2+3", "@cmd", "plain", "a=b"]


def comp(unit, position="left", days=3, rem=30.0, site="North Pit", model="CP-75"):
    return {
        "unit": unit,
        "site": site,
        "position": position,
        "component_model": model,
        "remaining_h": rem,
        "utilisation_h_per_day": 10.0,
        "due_date": AS_OF + timedelta(days=days),
        "status": "watch",
        "limiting": "bearing",
    }


@pytest.fixture
def plan():
    rows = [
        comp("=1+1", "left", days=2, rem=20.0),  # formula-like tag
        comp("=1+1", "right", days=30, rem=300.0),  # paired with it (280 h apart)
        comp("Q;7,b\\x", days=3, rem=30.0),  # characters RFC 5545 must escape
        comp("LATE-1", days=1, rem=10.0, site="Mühlbach Säge " * 6),  # long, non-ASCII
        comp("LATE-2", days=1, rem=11.0),
    ]
    status = pd.DataFrame(rows, columns=list(STATUS_COLUMNS))
    # Hand-computed, 2 slots per week, earliest due first: LATE-1 and LATE-2 (day 1) fill
    # week 0; the pair (due day 2) goes to week 1, left late by 7 - 2 = 5 days; Q (day 3)
    # finds weeks 0 and 1 full and goes to week 2, late by 14 - 3 = 11 days.
    return plan_rebuilds(status, AS_OF, horizon_weeks=4, capacity_per_week=2)


# --- neutralisation, CSV ----------------------------------------------------------------------


def test_neutralise_text_prefixes_only_formula_like_text():
    assert [neutralise_text(v) for v in NASTY] == [
        "'=1+1",
        "'+SUM(A1:A2)",
        "'-2+3",
        "'@cmd",
        "plain",
        "a=b",
    ]
    assert neutralise_text(-2.5) == -2.5  # numbers are not text


BLANK_LED = [" =1+1", "  +SUM(A1:A2)", "\u00a0-2+3", " \n@cmd", "\t=1", " plain", " a=b"]


def test_neutralise_text_also_after_leading_blanks():
    # a spreadsheet program skips leading blanks before a formula (OWASP, "CSV Injection")
    assert [neutralise_text(v) for v in BLANK_LED] == [
        "' =1+1",
        "'  +SUM(A1:A2)",
        "'\u00a0-2+3",
        "' \n@cmd",
        "'\t=1",
        " plain",
        " a=b",
    ]


def test_csv_and_xlsx_neutralise_blank_led_formulas():
    df = pd.DataFrame({"unit": BLANK_LED})
    rows = list(csv.reader(io.StringIO(frame_to_csv_bytes(df).decode("utf-8"))))
    assert [r[0] for r in rows[1:]] == [neutralise_text(v) for v in BLANK_LED]
    ws = openpyxl.load_workbook(io.BytesIO(frame_to_xlsx_bytes(df, "units"))).active
    cells = [ws.cell(row=i + 2, column=1) for i in range(len(BLANK_LED))]
    assert all(c.data_type == "s" for c in cells)
    assert [c.value.startswith("'") for c in cells] == [True] * 5 + [False] * 2


def test_csv_neutralises_text_cells_and_keeps_numbers():
    df = pd.DataFrame({"unit": NASTY, "remaining_h": [-1.5, 0, 1, 2, 3, 4]})
    rows = list(csv.reader(io.StringIO(frame_to_csv_bytes(df).decode("utf-8"))))
    assert rows[0] == ["unit", "remaining_h"]
    assert [r[0] for r in rows[1:]] == ["'=1+1", "'+SUM(A1:A2)", "'-2+3", "'@cmd", "plain", "a=b"]
    assert rows[1][1] == "-1.5"


def test_plan_csv_reads_back_with_the_same_rows(plan):
    raw = plan_to_csv_bytes(plan)
    assert b"\r\n" in raw
    back = pd.read_csv(io.BytesIO(raw), dtype=str, keep_default_na=False)
    a = plan.assignments
    assert list(back.columns) == ["state", *a.columns, "iso_week"]
    back = back[back.state == "planned"]  # the drives not placed follow, with why
    assert len(back) == len(a)
    assert set(back.unit) == {"'=1+1", "Q;7,b\\x", "LATE-1", "LATE-2"}
    assert back.week.astype(int).tolist() == a.week.tolist()
    assert back.week_start.tolist() == [d.isoformat() for d in a.week_start]
    assert back.reason.tolist() == a.reason.tolist()


# --- XLSX ---------------------------------------------------------------------------------


def test_xlsx_formula_like_text_stays_text():
    df = pd.DataFrame({"unit": NASTY, "hours": [1.5, float("nan"), 3, 4, 5, 6], "day": [AS_OF] * 6})
    raw = frame_to_xlsx_bytes(df, "ranking")
    with zipfile.ZipFile(io.BytesIO(raw)) as zf:
        sheet_xml = zf.read("xl/worksheets/sheet1.xml").decode("utf-8")
    assert "<f>" not in sheet_xml and "<f " not in sheet_xml  # no formula element anywhere
    wb = openpyxl.load_workbook(io.BytesIO(raw))
    ws = wb["ranking"]
    rows = list(ws.iter_rows(values_only=True))
    assert rows[0] == ("unit", "hours", "day")
    assert [r[0] for r in rows[1:]] == ["'=1+1", "'+SUM(A1:A2)", "'-2+3", "'@cmd", "plain", "a=b"]
    assert all(ws.cell(row=i, column=1).data_type == "s" for i in range(2, 8))
    assert rows[1][1] == 1.5 and rows[2][1] is None
    assert rows[1][2].date() == AS_OF


def test_plan_xlsx_reads_back_with_the_same_rows(plan):
    wb = openpyxl.load_workbook(io.BytesIO(plan_to_xlsx_bytes(plan)))
    assert wb.sheetnames[:3] == ["read me", "settings", "rebuilds"]
    readme = [r[0] for r in wb["read me"].iter_rows(min_row=2, values_only=True)]
    assert any("qualified technicians" in line for line in readme)
    rows = list(wb["rebuilds"].iter_rows(values_only=True))
    a = plan.assignments
    assert list(rows[0]) == list(a.columns)
    assert len(rows) - 1 == len(a)
    for got, (_, want) in zip(rows[1:], a.iterrows(), strict=True):
        got = dict(zip(rows[0], got, strict=True))
        assert got["unit"] == ("'=1+1" if want.unit == "=1+1" else want.unit)
        assert got["week"] == want.week and got["downtime"] == want.downtime
        assert got["week_start"].date() == want.week_start
        assert got["due_date"].date() == want.due_date
        assert got["remaining_h"] == pytest.approx(want.remaining_h)
        assert got["late_days"] == want.late_days
        assert got["paired_with"] == (want.paired_with or None)  # empty text -> empty cell
        assert got["reason"] == want.reason
    cap = list(wb["weekly capacity"].iter_rows(values_only=True))
    assert len(cap) - 1 == len(plan.capacity)


@pytest.mark.parametrize("name", ["", "x" * 32, "a/b", "what?", "'quoted'"])
def test_bad_sheet_names_are_refused(name):
    with pytest.raises(ValueError, match="sheet_name"):
        frame_to_xlsx_bytes(pd.DataFrame({"a": [1]}), name)


def test_xlsx_refuses_duplicate_sheets_and_strips_control_characters():
    with pytest.raises(ValueError, match="sheet names must differ"):
        frames_to_xlsx_bytes({"A": pd.DataFrame(), "a": pd.DataFrame()})
    raw = frame_to_xlsx_bytes(pd.DataFrame({"note": ["bell\x07here"]}))
    ws = openpyxl.load_workbook(io.BytesIO(raw))["data"]
    assert ws.cell(row=2, column=1).value == "bell\ufffdhere"


# --- iCalendar ----------------------------------------------------------------------------


def test_ics_parses_with_icalendar_one_event_per_downtime(plan):
    raw = plan_to_ics_bytes(plan, dtstamp=STAMP)
    cal = icalendar.Calendar.from_ical(raw)
    events = list(cal.walk("VEVENT"))
    assert len(events) == plan.assignments.downtime.nunique() == 4
    by_unit = {}
    for ev in events:
        assert ev.get("DTSTAMP").dt == STAMP
        by_unit[str(ev.get("SUMMARY")).split(":")[0]] = ev
    pair = by_unit["Rebuild downtime =1+1"]
    assert str(pair.get("SUMMARY")) == "Rebuild downtime =1+1: left + right (late 5 d)"
    assert pair.get("DTSTART").dt == date(2026, 3, 9)  # week 1 starts 7 days after AS_OF
    assert pair.get("DTEND").dt == date(2026, 3, 10)
    text = str(pair.get("DESCRIPTION"))
    assert "left (CP-75): due 2026-03-04, 20 h remaining, LATE by 1 week(s), 5 day(s)" in text
    assert "right (CP-75): due 2026-04-01, 300 h remaining, on time." in text
    assert "estimates" in text and "qualified technicians" in text
    assert "service limits" in text
    assert len({str(ev.get("UID")) for ev in events}) == 4


def test_ics_escaping_round_trips(plan):
    cal = icalendar.Calendar.from_ical(plan_to_ics_bytes(plan, dtstamp=STAMP))
    summaries = [str(ev.get("SUMMARY")) for ev in cal.walk("VEVENT")]
    assert any(s.startswith("Rebuild downtime Q;7,b\\x: left") for s in summaries)
    assert ics_escape("a\\b;c,d\ne") == "a\\\\b\\;c\\,d\\ne"


def test_ics_raw_text_follows_rfc5545_lines(plan):
    raw = plan_to_ics_bytes(plan, dtstamp=STAMP)
    assert raw.endswith(b"\r\n") and b"\n" not in raw.replace(b"\r\n", b"")
    lines = raw.split(b"\r\n")[:-1]
    assert max(len(line) for line in lines) <= 75
    for line in lines:
        line.decode("utf-8")  # folding never splits a multi-byte character
    assert any(line.startswith(b" ") for line in lines)  # long descriptions were folded
    assert lines[0] == b"BEGIN:VCALENDAR" and lines[-1] == b"END:VCALENDAR"
    assert b"DTSTAMP:20260302T073000Z" in raw


def test_ics_fold_exact_boundaries():
    assert ics_fold("x" * 75) == "x" * 75 + "\r\n"
    assert ics_fold("x" * 76) == "x" * 75 + "\r\n x\r\n"
    # a 2-octet character that would straddle octet 75 moves to the next line
    folded = ics_fold("x" * 74 + "é")
    assert folded == "x" * 74 + "\r\n é\r\n"


def test_ics_weekday_and_late_summary(plan):
    cal = icalendar.Calendar.from_ical(plan_to_ics_bytes(plan, weekday=2, dtstamp=STAMP))
    events = list(cal.walk("VEVENT"))
    # AS_OF is a Monday, so weekday 2 (Wednesday) is 2 days after each week start
    starts = {ev.get("DTSTART").dt for ev in events}
    assert all(d.weekday() == 2 for d in starts)
    assert starts == {date(2026, 3, 4), date(2026, 3, 11), date(2026, 3, 18)}  # weeks 0-2
    late = [str(ev.get("SUMMARY")) for ev in events if "late" in str(ev.get("SUMMARY"))]
    assert sorted(s.rsplit("(", 1)[1] for s in late) == ["late 11 d)", "late 5 d)"]


def test_ics_of_an_empty_plan_is_a_valid_empty_calendar():
    status = pd.DataFrame(columns=list(STATUS_COLUMNS))
    empty = plan_rebuilds(status, AS_OF, horizon_weeks=2, capacity_per_week=1)
    cal = icalendar.Calendar.from_ical(plan_to_ics_bytes(empty, dtstamp=STAMP))
    assert list(cal.walk("VEVENT")) == []


def test_bad_export_arguments(plan):
    with pytest.raises(ValueError, match="weekday"):
        plan_to_ics_bytes(plan, weekday=7)
    with pytest.raises(ValueError, match="dtstamp"):
        plan_to_ics_bytes(plan, dtstamp=datetime(2026, 3, 2))
    with pytest.raises(ValueError, match="fmt must be one of csv, xlsx, ics"):
        plan_export_bytes(plan, "pdf")
    with pytest.raises(ValueError, match="DataFrame"):
        frame_to_csv_bytes([1, 2])
    assert plan_export_bytes(plan, "csv") == plan_to_csv_bytes(plan)


def test_empty_plan_exports_have_headers_only():
    status = pd.DataFrame(columns=list(STATUS_COLUMNS))
    empty = plan_rebuilds(status, AS_OF, horizon_weeks=2, capacity_per_week=1)
    back = pd.read_csv(io.BytesIO(plan_to_csv_bytes(empty)))
    assert back.empty and list(back.columns) == ["state", *empty.assignments.columns, "iso_week"]
    wb = openpyxl.load_workbook(io.BytesIO(plan_to_xlsx_bytes(empty)))
    assert [r for r in wb["rebuilds"].iter_rows(values_only=True)] == [
        tuple(empty.assignments.columns)
    ]


def test_every_plan_format_names_the_drives_not_placed():
    # capacity 1 with 2 due in week 0 and a 1-week horizon: one has no room; one has no date
    rows = [
        {"unit": u, "site": "S", "position": "left", "component_model": "M", "remaining_h": r,
         "utilisation_h_per_day": 5.0, "due_date": AS_OF + timedelta(days=d), "status": "x",
         "limiting": "bearing"}
        for u, r, d in (("N-1", 10.0, 2), ("N-2", 12.0, 2))
    ] + [{"unit": "N-3", "site": "S", "position": "left", "component_model": "M",
          "remaining_h": 900.0, "utilisation_h_per_day": float("nan"), "due_date": None,
          "status": "x", "limiting": "bearing"}]  # fmt: skip
    plan = plan_rebuilds(pd.DataFrame(rows), AS_OF, horizon_weeks=1, capacity_per_week=1)
    csv = pd.read_csv(io.BytesIO(plan_to_csv_bytes(plan)), dtype=str, keep_default_na=False)
    states = dict(zip(csv.unit, csv.state, strict=True))
    assert states == {"N-1": "planned", "N-2": "no room in the horizon",
                      "N-3": "cannot be placed by date"}  # fmt: skip
    ics = plan_to_ics_bytes(plan, dtstamp=datetime(2026, 3, 1, tzinfo=UTC)).decode()
    assert "Not placed in the rebuild plan: 2 drives" in ics and "N-3 left" in ics
    wb = openpyxl.load_workbook(io.BytesIO(plan_to_xlsx_bytes(plan)))
    assert [r[0] for r in wb["unplanned"].iter_rows(values_only=True)][1:] == ["N-2"]
