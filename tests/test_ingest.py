"""Tests of monitor.ingest against the sample files in tests/data."""

import hashlib
import io
import json
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.ingest.parse import MAX_PROBLEMS, parse_file

DATA = Path(__file__).parent / "data"
PSI_IN_BAR = 0.06894757  # NIST SP 811 (2008), Appendix B.8
US_GALLON_IN_L = 3.785411784  # NIST SP 811 (2008), Appendix B.8 (231 in3, exact)
HEADER = (
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,hours"
)


def parse(name: str):
    return parse_file((DATA / name).read_bytes(), name)


def only(parsed, fragment: str):
    """The problems whose message contains ``fragment`` (at least one)."""
    hits = [p for p in parsed.problems if fragment in p.message]
    assert hits, [str(p) for p in parsed.problems]
    assert not parsed.histograms and not parsed.readings
    return hits


# ------------------------------------------------------------------ good files


def test_histogram_csv_parses_into_sorted_bands():
    p = parse("hist_pressure.csv")
    assert p.ok, [str(x) for x in p.problems]
    assert [(h.unit, h.position) for h in p.histograms] == [
        ("LR-101", "left"),
        ("LR-101", "right"),
        ("TM-201", "drive"),
    ]
    left = p.histograms[0]
    # rows come as 0-50, 100-250, 50-100, ... in the file: sorted by low edge here
    np.testing.assert_array_equal(left.pressure_low_bar, [0, 50, 100, 250, 300])
    np.testing.assert_array_equal(left.pressure_high_bar, [50, 100, 250, 300, 450])
    np.testing.assert_array_equal(left.hours, [2.5, 1.5, 3.25, 0.75, 0.5])
    assert left.period_start == datetime(2026, 3, 2, 6, tzinfo=UTC)
    assert left.mean_speed_rpm == 2100 and left.line == 2
    drive = p.histograms[2]
    # +02:00 offset becomes UTC
    assert drive.period_start == datetime(2026, 3, 2, 6, tzinfo=UTC)
    assert drive.mean_speed_rpm is None and drive.speed_low_rpm is None


def _arrays(parsed):
    return [
        (
            h.unit,
            h.position,
            h.quantity,
            h.period_start,
            h.period_end,
            h.hour_meter_start,
            h.hour_meter_end,
            h.pressure_low_bar.tolist(),
            h.pressure_high_bar.tolist(),
            h.hours.tolist(),
            h.mean_speed_rpm,
        )
        for h in parsed.histograms
    ]


def test_csv_semicolon_and_json_give_identical_histograms():
    comma, semi, js = (
        parse("hist_pressure.csv"),
        parse("hist_pressure_semicolon.csv"),
        parse("upload.json"),
    )
    assert comma.ok and semi.ok and js.ok
    assert _arrays(comma) == _arrays(semi) == _arrays(js)


def test_semicolon_file_has_bom_and_crlf():
    raw = (DATA / "hist_pressure_semicolon.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf") and b"\r\n" in raw


def test_bom_and_crlf_on_comma_csv():
    raw = (DATA / "hist_pressure.csv").read_bytes()
    variant = b"\xef\xbb\xbf" + raw.replace(b"\n", b"\r\n")
    assert _arrays(parse_file(variant, "v.csv")) == _arrays(parse("hist_pressure.csv"))


def test_content_hash_and_file_like_input():
    raw = (DATA / "hist_pressure.csv").read_bytes()
    p = parse_file(io.BytesIO(raw), "x.csv")
    assert p.content_sha256 == hashlib.sha256(raw).hexdigest()
    assert len(p.histograms) == 3


def test_pressure_speed_matrix_in_psi():
    p = parse("hist_pressure_speed.csv")
    assert p.ok, [str(x) for x in p.problems]
    (h,) = p.histograms
    assert h.quantity == "pressure_speed"
    # 1450 psi * 0.06894757 bar/psi (NIST SP 811)
    np.testing.assert_allclose(
        h.pressure_low_bar, np.array([0, 1450, 2900]) * PSI_IN_BAR, rtol=1e-6
    )
    np.testing.assert_allclose(
        h.pressure_high_bar, np.array([1450, 2900, 5800]) * PSI_IN_BAR, rtol=1e-6
    )
    np.testing.assert_array_equal(h.speed_low_rpm, [0, 1000, 2000])
    np.testing.assert_array_equal(h.speed_high_rpm, [1000, 2000, 3000])
    # cells from the file; cells not given are 0 h
    expected = [[1.0, 0.5, 0.0], [0.0, 1.5, 1.0], [0.0, 0.0, 2.0]]
    np.testing.assert_array_equal(h.hours, expected)
    assert h.period_start == datetime(2026, 3, 4, 5, tzinfo=UTC)


def test_readings_csv_converts_gpm_psi_and_fahrenheit():
    p = parse("readings.csv")
    assert p.ok, [str(x) for x in p.problems]
    a, b, c = p.readings
    assert a.case_drain_lpm == pytest.approx(0.5 * US_GALLON_IN_L, rel=1e-9)
    assert a.test_pressure_bar == pytest.approx(3625 * PSI_IN_BAR, rel=1e-6)
    assert a.oil_temp_c == pytest.approx(50.0, abs=1e-9)  # (122 - 32) * 5/9, definition of degF
    assert (a.iso4406, b.iso4406, c.iso4406) == ("18/16/13", "-/15/12", ">28/24/19")
    assert c.case_drain_lpm is None and c.oil_temp_c is None
    assert c.taken_at == datetime(2026, 3, 2, 13, tzinfo=UTC)
    assert (a.line, c.line) == (2, 4)


def test_json_readings_match_csv_readings():
    js = parse("upload.json").readings[0]
    csv_ = parse("readings.csv").readings
    assert js.case_drain_lpm == pytest.approx(csv_[0].case_drain_lpm)
    assert js.oil_temp_c == pytest.approx(csv_[0].oil_temp_c)
    assert js.taken_at == csv_[2].taken_at


def test_mpa_header_and_gap_between_bands():
    text = (
        HEADER.replace("_bar", "_MPa")
        + "\nLR-101,left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,3,pressure,0,10,2"
        + "\nLR-101,left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,3,pressure,20,30,1\n"
    )
    p = parse_file(text.encode(), "mpa.csv")
    assert p.ok, [str(x) for x in p.problems]
    # SI: 1 MPa = 10 bar
    np.testing.assert_allclose(p.histograms[0].pressure_low_bar, [0, 200])
    np.testing.assert_allclose(p.histograms[0].pressure_high_bar, [100, 300])


MIXED = (  # invented: one plain histogram, one 2 x 2 matrix with a cell left out, one plain
    "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
    "pressure_low_bar,pressure_high_bar,speed_low_rpm,speed_high_rpm,hours\n"
    "LR-101,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,10,16,pressure,100,200,,,2\n"
    "LR-101,left,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,10,16,pressure,0,100,,,4\n"
    "LR-101,right,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,10,16,pressure_speed,0,100,0,1000,1\n"
    "LR-101,right,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,10,16,pressure_speed,100,200,1000,2000,3\n"
    "LR-101,right,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,10,16,pressure_speed,0,100,1000,2000,2\n"
    "TM-201,drive,2026-04-01T00:00:00Z,2026-04-02T00:00:00Z,50,51,pressure,0,300,,,1\n"
)


def test_batch_holds_every_histogram_end_to_end():
    p = parse_file(MIXED.encode(), "m.csv")
    assert p.ok, [str(x) for x in p.problems]
    b = p.batch
    assert len(b) == 3 and b.quantity.tolist() == ["pressure", "pressure_speed", "pressure"]
    assert b.n_pressure.tolist() == [2, 2, 1] and b.n_speed.tolist() == [0, 2, 0]
    # bands sorted by low edge within each histogram, histograms in file order
    assert b.pressure_low_bar.tolist() == [0, 100, 0, 100, 0]
    assert b.speed_low_rpm.tolist() == [0, 1000]
    # the matrix row by row: (0-100 bar: 1 h, 2 h), (100-200 bar: not given -> 0 h, 3 h)
    assert b.hours.tolist() == [4, 2, 1, 2, 0, 3, 1]
    assert b.hours_offset.tolist() == [0, 2, 6, 7]
    assert b.line.tolist() == [2, 4, 7]
    assert b.period_start_ns.tolist() == [1775001600 * 10**9] * 3  # 2026-04-01T00:00Z
    matrix = p.histograms[1]
    np.testing.assert_array_equal(matrix.hours, [[1, 2], [0, 3]])
    np.testing.assert_array_equal(matrix.speed_high_rpm, [1000, 2000])
    assert np.shares_memory(matrix.hours, b.hours)  # records are views of the batch


def test_batch_take_and_records_round_trip():
    p = parse_file(MIXED.encode(), "m.csv")
    part = p.batch.take(np.array([2, 1]))
    assert [h.unit for h in part.histograms()] == ["TM-201", "LR-101"]
    np.testing.assert_array_equal(part.histogram(1).hours, [[1, 2], [0, 3]])
    again = type(p.batch).from_histograms(p.histograms)
    for a, b in zip(again.histograms(), p.histograms, strict=True):
        assert (a.unit, a.quantity, a.period_end) == (b.unit, b.quantity, b.period_end)
        assert a.line == b.line and a.mean_speed_rpm == b.mean_speed_rpm
        np.testing.assert_array_equal(a.hours, b.hours)
    with pytest.raises(ValueError, match="timezone-aware"):
        h = p.histograms[0]
        h.period_start = h.period_start.replace(tzinfo=None)
        type(p.batch).from_histograms([h])


def test_assigning_records_replaces_the_batch():
    p = parse_file(MIXED.encode(), "m.csv")
    first = p.histograms[:1]
    p.histograms = first
    assert p.batch is None and p.histograms == first
    assert len(p.histogram_batch()) == 1


def test_blank_lines_keep_line_numbers():
    raw = (DATA / "bad_band_edges.csv").read_text().replace("\n", "\n\n", 1)
    (prob,) = parse_file(raw.encode(), "b.csv").problems
    assert prob.line == 4  # one blank line inserted after the header


@settings(max_examples=30, deadline=None)
@given(st.permutations(list(range(6))))
def test_row_order_does_not_change_histograms(perm):
    lines = (DATA / "hist_pressure.csv").read_text().splitlines()
    body = lines[1:]
    shuffled = [lines[0]] + [body[i] for i in perm] + body[6:]
    p = parse_file("\n".join(shuffled).encode(), "s.csv")
    base = [a[:-1] for a in _arrays(parse("hist_pressure.csv"))]
    assert sorted(a[:-1] for a in _arrays(p)) == sorted(base)


# ------------------------------------------------------------------ rejections


def test_missing_column():
    (pr,) = only(parse("bad_missing_column.csv"), "missing required column `hours`")
    assert pr.line == 1 and "pressure_low_<unit>" in pr.message


def test_column_without_unit():
    (pr,) = only(parse("bad_no_unit.csv"), "has no unit")
    assert pr.column == "pressure_low" and pr.line == 1
    assert "`pressure_low_bar` or `pressure_low_psi`" in pr.message


def test_column_with_unknown_unit():
    (pr,) = only(parse("bad_unknown_unit.csv"), "unknown unit `atm`")
    assert pr.column == "pressure_high_atm"
    assert "`pressure_high_mpa` or `pressure_high_kpa`" in pr.message


def test_unknown_column_lists_known_ones():
    text = HEADER + ",colour\n"
    (pr,) = only(parse_file(text.encode(), "c.csv"), "unknown column `colour`")
    assert "hour_meter_start" in pr.message


def test_unparseable_timestamp():
    (pr,) = only(parse("bad_timestamp.csv"), "not a valid ISO 8601 timestamp")
    assert (pr.line, pr.column, pr.value) == (2, "period_start", "02/03/2026 06:00")
    assert "2 more rows" in pr.message


def test_timestamp_without_offset():
    (pr,) = only(parse("bad_no_offset.csv"), "has no UTC offset")
    assert (pr.line, pr.column) == (2, "period_end")


def test_period_end_not_after_start():
    (pr,) = only(parse("bad_period_order.csv"), "period_end is not after period_start")
    assert pr.line == 2


def test_hour_meter_backwards():
    (pr,) = only(parse("bad_hour_meter_backwards.csv"), "is below hour_meter_start")
    assert (pr.line, pr.column) == (2, "hour_meter_end")


def test_negative_nan_and_infinite_hours():
    p = parse("bad_hours.csv")
    bad = {(x.line, x.value) for x in p.problems if x.column == "hours"}
    assert bad == {(2, "-1"), (3, "nan"), (4, "inf")}
    only(p, "`hours` must be a number >= 0")


def test_band_low_not_below_high():
    (pr,) = only(parse("bad_band_edges.csv"), "low edge is not below the high edge")
    assert (pr.line, pr.column, pr.value) == (3, "pressure_low_bar", "200")


def test_overlapping_bands():
    (pr,) = only(parse("bad_overlap.csv"), "overlaps the band 0-100 (line 2)")
    assert pr.line == 4


def test_pressure_out_of_range_after_conversion():
    (pr,) = only(parse("bad_pressure_range.csv"), "outside the valid range 0-1000 bar")
    # 20000 psi * 0.06894757 = 1379.0 bar (NIST SP 811 factor)
    assert pr.line == 3 and "1379.0 bar" in pr.message


def test_speed_out_of_range():
    (pr,) = only(parse("bad_speed_range.csv"), "outside the valid range 0-10000 rpm")
    assert (pr.line, pr.column) == (4, "speed_high_rpm")


def test_hours_differ_from_hour_meter():
    (pr,) = only(parse("bad_hours_sum.csv"), "add up to 4.00 h but the hour meter advanced 10.00 h")
    assert pr.line == 2 and "at most 0.50 h" in pr.message


def test_hours_within_tolerance_accepted():
    # 4 h of bands vs 4.2 h on the meter: within max(0.25 h, 5 %) = 0.25 h
    text = (DATA / "bad_hours_sum.csv").read_text().replace(",110,", ",104.2,")
    assert parse_file(text.encode(), "t.csv").ok


def test_not_utf8():
    (pr,) = only(parse("bad_not_utf8.csv"), "not UTF-8")
    assert pr.line == 2 and "CSV UTF-8" in pr.message


def test_empty_file():
    only(parse("bad_empty.csv"), "file is empty")
    only(parse_file(b"\xef\xbb\xbf  \r\n", "blank.csv"), "file is empty")


def test_malformed_iso4406():
    p = parse("bad_iso4406.csv")
    assert [(x.line, x.value) for x in p.problems] == [
        (2, "18/16"),
        (3, "31/16/13"),
        (4, "17/-/12"),
    ]
    only(p, "ISO 4406 code")


def test_unknown_quantity():
    (pr,) = only(parse("bad_quantity.csv"), "unknown quantity `torque`")
    assert pr.column == "quantity" and "pressure_speed" in pr.message


def test_invalid_json_has_line_and_column():
    (pr,) = only(parse("bad_json.json"), "invalid JSON at line 4, column 2")
    assert pr.line == 4 and pr.column == "column 2"


def test_json_shape_problems_name_the_field_path():
    p = parse("bad_json_shape.json")
    cols = {x.column for x in p.problems}
    assert {
        "histograms[0].hours",
        "histograms[1].colour",
        "histograms[1].pressure_unit",
        "histograms[2].hours[1]",
        "histograms[2].pressure_edges[1]",
    } <= cols


def test_all_problems_collected_and_capped():
    rows = [
        f"U{i},left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,1,pressure,0,10,-1"
        for i in range(MAX_PROBLEMS + 50)
    ]
    p = parse_file(("\n".join([HEADER, *rows]) + "\n").encode(), "many.csv")
    assert len(p.problems) == MAX_PROBLEMS + 1
    assert p.problems[-1].message.endswith("more problems not listed")


def test_wrong_number_of_fields():
    row = "LR-101,left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,1,pressure,0,10,1"
    text = f"{HEADER}\n{row}\n{row},9\n"
    (pr,) = only(parse_file(text.encode(), "f.csv"), "has 11 fields but the header has 10")
    assert pr.line == 3
    (pr,) = only(parse_file(f"{HEADER}\n{row},9\n".encode(), "g.csv"), "more fields than")
    assert pr.line == 2


def test_text_in_number_column():
    text = HEADER + "\nLR-101,left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,1,pressure,0,ten,1\n"
    (pr,) = only(parse_file(text.encode(), "n.csv"), "must be a number")
    assert (pr.line, pr.column, pr.value) == (2, "pressure_high_bar", "ten")


def test_numeric_looking_tags_keep_leading_zeros():
    text = HEADER + "\n0042,1,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,1,pressure,0,10,1\n"
    (h,) = parse_file(text.encode(), "z.csv").histograms
    assert (h.unit, h.position) == ("0042", "1")


def test_json_single_document_is_accepted():
    doc = json.loads((DATA / "upload.json").read_text())[1]
    p = parse_file(json.dumps(doc).encode(), "one.json")
    assert p.ok and len(p.histograms) == 1 and len(p.readings) == 1


def test_overlapping_periods_in_one_file():
    rows = [
        "LR-101,left,2026-03-02T06:00:00Z,2026-03-03T06:00:00Z,0,1,pressure,0,10,1",
        "LR-101,left,2026-03-02T18:00:00Z,2026-03-03T18:00:00Z,1,2,pressure,0,10,1",
        "LR-101,right,2026-03-02T18:00:00Z,2026-03-03T18:00:00Z,1,2,pressure,0,10,1",
    ]
    p = parse_file(("\n".join([HEADER, *rows]) + "\n").encode(), "o.csv")
    (pr,) = only(p, "period overlaps the histogram at line 2")
    assert (pr.line, pr.column) == (3, "period_start")


def test_duplicate_pressure_speed_cell():
    text = (DATA / "hist_pressure_speed.csv").read_text()
    last = text.strip().splitlines()[-1]
    p = parse_file((text + last + "\n").encode(), "d.csv")
    (pr,) = only(p, "cell given twice (also on line 6)")
    assert pr.line == 7
