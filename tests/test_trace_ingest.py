"""Tests of monitor.ingest.trace: reading a trace CSV in chunks, and every rejection."""

import io
from datetime import UTC, datetime

import numpy as np
import pandas as pd
import pytest

from monitor.ingest.common import MAX_PROBLEMS
from monitor.ingest.trace import SHOWN_CHARS, TraceSettings, read_trace
from tests.test_trace_model import DT_S, RATE_BAR_S, triangle
from tests.test_trace_peaks import SPIKES, sine_with_spikes, stall_trace

HEADER = "time_s,pressure_a_bar,pressure_b_bar\n"


def csv_bytes(**columns) -> bytes:
    """A trace CSV of the columns given (floats written so that they read back exactly)."""
    buf = io.StringIO()
    pd.DataFrame(columns).to_csv(buf, index=False)
    return buf.getvalue().encode()


def problems(data: bytes, **settings) -> list[str]:
    """The problems of a file as printed; asserts that the file gave no results."""
    r = read_trace(data, "bad.csv", TraceSettings(**settings))
    assert not r.ok and r.samples == 0 and r.hours.size == 0 and r.envelope is None
    assert r.turning_points_bar.size == 0 and r.relief_excursions is None
    return [str(p) for p in r.problems]


@pytest.fixture(scope="module")
def triangle_file() -> bytes:
    t, p = triangle(3)
    return csv_bytes(time_s=t, pressure_a_bar=p, pressure_b_bar=np.full(p.size, 20.0))


def test_triangle_file_time_per_band(triangle_file):
    r = read_trace(triangle_file, "tri.csv")
    assert r.ok, r.problems
    s = r.hours * 3600.0
    # hand-computed as in test_trace_model: 2 ramps x 25 / 128 s per band and period; the
    # end bands 2 x 10 / 128 s, less the last sample's interval in the 75-100 band
    np.testing.assert_allclose(s[4:12], 3 * 2 * 25.0 / RATE_BAR_S, atol=1e-9)
    assert s[3] == pytest.approx(3 * 2 * 10.0 / RATE_BAR_S - DT_S, abs=1e-9)
    assert s[12] == pytest.approx(3 * 2 * 10.0 / RATE_BAR_S, abs=1e-9)
    np.testing.assert_array_equal(r.pressure_edges_bar, np.arange(14) * 25.0)  # up to 325
    assert r.samples == 3 * 2 * 1760 and r.gap_count == 0
    assert r.covered_s == pytest.approx(r.duration_s) == pytest.approx((r.samples - 1) * DT_S)
    assert r.mean_low_side_bar == pytest.approx(20.0)
    # hand-computed: the samples are symmetric about 200 bar, but the last (90.0625 bar)
    # has no duration: mean of the other 10559 = 200 + (200 - 90.0625) / 10559
    assert r.mean_high_side_bar == pytest.approx(200.0 + 109.9375 / 10559, rel=1e-12)
    assert r.max_high_side_bar == 310.0 - 0.0625
    assert r.started_at is None and r.hours_by_speed is None and r.mean_speed_rpm is None
    # the same trace in MPa (1 MPa = 10 bar) gives the same histogram
    t, p = triangle(3)
    mpa = csv_bytes(time_s=t, pressure_a_mpa=p / 10.0, pressure_b_MPa=np.full(p.size, 2.0))
    r2 = read_trace(mpa, "tri_mpa.csv")
    assert r2.source_units == {"pressure_a": "mpa", "pressure_b": "mpa"}
    np.testing.assert_allclose(r2.hours, r.hours, rtol=1e-12)


def test_irregular_sampling_and_gap_file():
    data = (
        HEADER + "0,10,5\n0.5,60,5\n0.7,5,60\n1.7,130,5\n5.0,10,5\n5.25,30,2\n6.0,200,5\n"
    ).encode()
    r = read_trace(data, "irregular.csv")
    # hand-computed: 0-25 bar 0.5 + 0.25 s, 25-50 bar 0.75 s, 50-75 bar 0.2 + 1.0 s; the
    # 3.3-s interval after 130 bar is a gap (> 2 s) and the last sample has no duration
    np.testing.assert_allclose(r.hours * 3600, [0.75, 0.75, 1.2], atol=1e-12)
    assert (r.gap_count, r.gap_total_s) == (1, pytest.approx(3.3))
    assert r.covered_s == pytest.approx(2.7) and r.duration_s == 6.0
    # low side 5 bar for 1.95 s and 2 bar for 0.75 s
    assert r.mean_low_side_bar == pytest.approx((5 * 1.95 + 2 * 0.75) / 2.7)
    assert r.operating_hours == pytest.approx(2.7 / 3600)


def test_spikes_file_peaks_and_notes():
    t, p = sine_with_spikes()
    data = csv_bytes(time_s=t, pressure_a_bar=np.full(p.size, 22.0), pressure_b_bar=p)
    r = read_trace(data, "spikes.csv", TraceSettings(relief_bar=450.0, cutoff_bar=420.0))
    peak = np.array([s[1] for s in SPIKES])
    e = r.relief_excursions
    np.testing.assert_array_equal(e.peak_bar, peak)
    # hand-computed as in test_trace_peaks: 2 (P - 450) / 2000 s over the relief
    np.testing.assert_allclose(e.duration_s, 2 * (peak - 450.0) / 2000.0, atol=1e-9)
    np.testing.assert_allclose(e.rise_rate_bar_per_s, 2000.0, rtol=1e-6)
    np.testing.assert_allclose(r.cutoff_excursions.duration_s, (peak - 420.0) / 1000.0, atol=1e-9)
    # spikes of 520 and 600 bar pass 495 bar; the short visits to the relief (below 1 s in
    # all) give no cut-off note
    assert r.stalls.at_relief_s < 1.0
    assert len(r.notes) == 1 and r.notes[0].startswith("2 pressure spike(s)")
    assert r.turning_points_bar.max() == 600.0


def noisy_trace(rows: int = 3000) -> bytes:
    """An invented noisy trace with speed, direction changes, a stall, spikes and gaps."""
    rng = np.random.default_rng(14)
    step = rng.choice([0.01, 0.02], size=rows, p=[0.7, 0.3])
    step[[700, 2200]] = 3.0  # two gaps in the recording
    t = np.cumsum(step)
    high = 250.0 + 180.0 * np.sin(t / 3.0) + rng.normal(0.0, 4.0, rows)
    high[1000:1600] = 452.0 + rng.normal(0.0, 2.0, 600)  # a stall against the relief
    high[[500, 2500]] += 250.0
    low = 25.0 + rng.normal(0.0, 0.5, rows)
    fwd = np.sin(t / 17.0) > 0
    speed = np.where((high > 430) | (rng.random(rows) < 0.01), 0.0, 1800.0 + rng.normal(0, 5, rows))
    return csv_bytes(
        time_s=t.round(4),
        pressure_a_bar=np.where(fwd, high, low).clip(0, 1000).round(1),
        pressure_b_bar=np.where(fwd, low, high).clip(0, 1000).round(1),
        speed_rpm=speed.clip(0).round(0),
    )


def assert_same_result(a, b):
    """Every result field equal (sums over chunks may differ in the last bits)."""
    for f in ("samples", "gap_count", "source_units", "started_at", "ended_at"):
        assert getattr(a, f) == getattr(b, f), f
    assert len(a.notes) == len(b.notes)  # their text rounds sums that may differ in last bits
    for f in ("duration_s", "covered_s", "gap_total_s", "mean_low_side_bar", "mean_speed_rpm"):
        assert getattr(a, f) == pytest.approx(getattr(b, f), rel=1e-12), f
    for f in ("pressure_edges_bar", "speed_edges_rpm", "turning_points_bar", "turning_points_s"):
        np.testing.assert_array_equal(getattr(a, f), getattr(b, f), err_msg=f)
    for c in a.envelope.minimum:
        np.testing.assert_array_equal(a.envelope.minimum[c], b.envelope.minimum[c], err_msg=c)
        np.testing.assert_array_equal(a.envelope.maximum[c], b.envelope.maximum[c], err_msg=c)
    np.testing.assert_allclose(a.hours, b.hours, rtol=1e-12, atol=1e-15)
    assert (a.hours_by_speed is None) == (b.hours_by_speed is None)
    if a.hours_by_speed is not None:
        np.testing.assert_allclose(a.hours_by_speed, b.hours_by_speed, rtol=1e-12, atol=1e-15)
    for key in ("relief_excursions", "cutoff_excursions"):
        ea, eb = getattr(a, key), getattr(b, key)
        for f in ("start_s", "duration_s", "peak_bar", "peak_s", "rise_rate_bar_per_s"):
            np.testing.assert_allclose(getattr(ea, f), getattr(eb, f), rtol=1e-12, err_msg=f)
    for f in ("at_relief_s", "stalled_at_relief_s", "at_cutoff_s", "held_at_cutoff_s"):
        assert getattr(a.stalls, f) == pytest.approx(getattr(b.stalls, f), rel=1e-12)


def test_small_chunks_give_the_same_result_as_one_chunk():
    data = noisy_trace()
    base = dict(relief_bar=450.0, cutoff_bar=400.0, envelope_buckets=50)
    one = read_trace(data, "noisy.csv", TraceSettings(**base, chunk_rows=10**6))
    assert one.ok and one.gap_count == 2 and len(one.relief_excursions) >= 3
    assert one.stalls.stalled_at_relief_s > 5.0
    for rows in (7, 1000):
        assert_same_result(
            read_trace(data, "noisy.csv", TraceSettings(**base, chunk_rows=rows)), one
        )
    # the envelope keeps every extreme in at most 2 x 50 buckets over the whole trace, each
    # bucket between duration / 100 and duration / 50 wide (widths double as the trace grows)
    env = one.envelope
    assert env.start_s.size <= 100 and env.start_s[0] == 0.0
    assert env.start_s[-1] <= one.duration_s < env.start_s[-1] + env.bucket_s
    assert env.bucket_s * 50 < one.duration_s <= env.bucket_s * 100
    column = pd.read_csv(io.BytesIO(data))["pressure_a_bar"]
    assert np.max(env.maximum["pressure_a_bar"]) == column.max()
    assert np.min(env.minimum["pressure_a_bar"]) == column.min()


def test_blank_lines_semicolons_and_streams():
    clean = (HEADER + "0,100,20\n1,200,20\n2,150,30\n").encode()
    ref = read_trace(clean, "clean.csv")
    blank = (HEADER + "\n0,100,20\n\n1,200,20\n2,150,30\n\n").encode()
    assert_same = read_trace(blank, "blank.csv")
    np.testing.assert_array_equal(assert_same.hours, ref.hours)
    semi = b"time_s;pressure_a_bar;pressure_b_bar\n0;100,0;20\n1;200;20\n2;150;30\n"
    np.testing.assert_array_equal(read_trace(semi, "semi.csv").hours, ref.hours)
    bom_cr = b"\xef\xbb\xbf" + clean.replace(b"\n", b"\r")  # byte-order mark, CR line ends
    np.testing.assert_array_equal(read_trace(bom_cr, "cr.csv").hours, ref.hours)

    class OneWay(io.RawIOBase):  # a stream that cannot seek (e.g. a pipe)
        def __init__(self, data):
            self.inner = io.BytesIO(data)

        def readable(self):
            return True

        def readinto(self, b):
            return self.inner.readinto(b)

    np.testing.assert_array_equal(read_trace(io.BufferedReader(OneWay(clean))).hours, ref.hours)
    # hand-computed: 1 s at 100 bar, 1 s at 200 bar; the last sample has no duration
    np.testing.assert_allclose(ref.hours * 3600, [0, 0, 0, 0, 1, 0, 0, 0, 1])


def test_timestamps_speed_matrix_and_mean_speed():
    data = (
        b"timestamp,pressure_a_psi,pressure_b_bar,speed_rpm\n"
        b"2026-03-02T10:00:00Z,1450.4,25,1000\n"
        b"2026-03-02T12:00:01+02:00,0,300,0\n"
        b"2026-03-02T10:00:02.5Z,0,20,0\n"
    )
    r = read_trace(data, "stamped.csv")
    assert r.ok, r.problems
    assert r.started_at == datetime(2026, 3, 2, 10, 0, 0, tzinfo=UTC)
    assert r.ended_at == datetime(2026, 3, 2, 10, 0, 2, 500000, tzinfo=UTC)
    # 1450.4 psi is 100.002 bar (1 psi = 0.0689476 bar, from memory): 1 s at 100 bar and
    # 1000 rpm; then 1.5 s at 300 bar and 0 rpm (hand-computed)
    assert r.duration_s == 2.5 and r.covered_s == 2.5
    assert r.hours_by_speed[4, 4] * 3600 == pytest.approx(1.0)  # 100-125 bar, 1000-1250 rpm
    assert r.hours_by_speed[12, 0] * 3600 == pytest.approx(1.5)  # 300-325 bar, 0-250 rpm
    assert r.hours_by_speed.sum() == pytest.approx(r.hours.sum())
    np.testing.assert_array_equal(r.speed_edges_rpm, np.arange(6) * 250.0)
    assert r.mean_speed_rpm == pytest.approx(1000.0 / 2.5)


def test_stalls_and_cutoff_note_from_a_file():
    t, p, n = stall_trace()
    data = csv_bytes(time_s=t, pressure_a_bar=p, pressure_b_bar=np.full(p.size, 25.0), speed_rpm=n)
    r = read_trace(data, "stall.csv", TraceSettings(relief_bar=450.0, cutoff_bar=420.0))
    # hand-computed as in test_trace_peaks: 10 s stalled at relief, 5 s at relief moving,
    # 20 s held at the cut-off
    assert r.stalls.stalled_at_relief_s == pytest.approx(10.0)
    assert r.stalls.at_relief_s == pytest.approx(15.0)
    assert r.stalls.held_at_cutoff_s == pytest.approx(20.0)
    assert len(r.notes) == 1 and "yet the loop spent 15.0 s at the relief" in r.notes[0]
    # bands reach the relief setting (450 bar) even though the trace stays at 448 bar
    assert r.pressure_edges_bar[-1] == 450.0
    # the component's own bands are kept, and extended where the trace goes above them
    own = read_trace(data, "stall.csv", TraceSettings(edges_bar=(0.0, 200.0, 400.0)))
    np.testing.assert_array_equal(own.pressure_edges_bar, [0, 200, 400, 425, 450])
    assert own.hours.sum() == pytest.approx(r.hours.sum())


# --- rejections -------------------------------------------------------------------


def test_rejects_a_file_without_time_column():
    assert problems(b"pressure_a_bar,pressure_b_bar\n1,2\n3,4\n") == [
        "bad.csv:1: missing time column: a trace CSV needs `time_s` (elapsed seconds) or "
        "`timestamp` (ISO 8601 with a UTC offset)"
    ]


def test_rejects_time_running_backwards():
    got = problems((HEADER + "0,1,2\n2,1,2\n1.5,1,2\n1.5,3,3\n3,1,1\n").encode())
    assert got == [
        "bad.csv:4 [time_s]: value '1.5': time runs backwards: earlier than 2 s on line 3; "
        "each row's time must be later than the row before",
        "bad.csv:5 [time_s]: value '1.5': the time repeats line 4: each row's time must be "
        "later than the row before",
    ]


def test_rejects_an_unknown_unit_suffix():
    assert problems(b"time_s,pressure_a_atm,pressure_b_bar\n0,1,2\n1,1,2\n") == [
        "bad.csv:1 [pressure_a_atm]: column `pressure_a_atm` has unknown unit `atm`: name it "
        "`pressure_a_bar` or `pressure_a_psi` or `pressure_a_mpa` or `pressure_a_kpa`"
    ]


def test_rejects_non_numeric_nan_blank_and_out_of_range_pressures():
    data = (HEADER + "0,100,20\n1,high,20\n2,nan,20\n3,,20\n4,-5,20\n5,1200,20\n").encode()
    assert problems(data) == [
        "bad.csv:3 [pressure_a_bar]: value 'high': `pressure_a_bar` must be a number",
        "bad.csv:4 [pressure_a_bar]: value 'nan': `pressure_a_bar` must be a finite number",
        "bad.csv:5 [pressure_a_bar]: `pressure_a_bar` is blank: every row needs a number",
        "bad.csv:6 [pressure_a_bar]: value '-5': -5 bar outside the valid range 0-1000 bar: "
        "check the value and the unit",
        "bad.csv:7 [pressure_a_bar]: value '1200': 1200 bar outside the valid range 0-1000 bar: "
        "check the value and the unit",
    ]
    psi = b"time_s,pressure_a_psi,pressure_b_bar\n0,20000,20\n1,1,2\n"
    assert problems(psi) == [
        "bad.csv:2 [pressure_a_psi]: value '20000': 20000 psi is 1379.0 bar, outside the valid "
        "range 0-1000 bar: check the value and the unit"
    ]


def test_rejects_a_file_of_one_sample():
    msg = (
        "bad.csv: the trace has 1 sample(s): at least 2 are needed, one row per sample of "
        "both loop pressures"
    )
    assert problems((HEADER + "0,100,20\n").encode()) == [msg]
    assert problems(HEADER.encode()) == [msg.replace("1 sample(s)", "0 sample(s)")]


def test_rejects_header_problems_all_at_once():
    got = problems(b"time_s,timestamp,pressure_a,pressure_b_bar,pressure_b_psi,torque_nm\n")
    assert got == [
        "bad.csv:1 [pressure_a]: column `pressure_a` has no unit: name it `pressure_a_bar` or "
        "`pressure_a_psi` or `pressure_a_mpa` or `pressure_a_kpa`",
        "bad.csv:1 [pressure_b_psi]: column `pressure_b_psi` repeats `pressure_b_bar`: keep "
        "only one",
        "bad.csv:1 [torque_nm]: unknown column `torque_nm`: known columns are time_s or "
        "timestamp, pressure_a_<unit>, pressure_b_<unit>, speed_rpm (optional)",
        "bad.csv:1: the file has both `time_s` and `timestamp`: keep only one",
    ]
    assert problems(b"") == [
        "bad.csv:1: the file has no header line: a trace CSV needs time_s or timestamp, "
        "pressure_a_<unit>, pressure_b_<unit>, speed_rpm (optional)"
    ]


def test_rejects_bad_rows_timestamps_and_encoding():
    assert problems((HEADER + "0,1,2\n1,2,3,4\n").encode()) == [
        "bad.csv:3: line 3 has 4 fields but the header has 3: every row needs one value per "
        "column, separated by `,`"
    ]
    stamps = b"timestamp,pressure_a_bar,pressure_b_bar\n2026-03-02T10:00:00,1,2\nsoon,1,2\n"
    assert problems(stamps) == [
        "bad.csv:2 [timestamp]: value '2026-03-02T10:00:00': the timestamp has no UTC offset: "
        "add `Z` or an offset such as `+02:00`",
        "bad.csv:3 [timestamp]: value 'soon': not a valid ISO 8601 timestamp: write ISO 8601 "
        "with an offset, e.g. 2026-03-02T10:00:00Z or 2026-03-02T12:00:00+02:00",
    ]
    assert problems((HEADER + "0,1,2\n1,\xff,2\n").encode("latin-1")) == [
        "bad.csv: the file is not UTF-8 text: save it as CSV UTF-8"
    ]
    assert problems((HEADER + '0,1,2\n1,"2,3\n2,2,2\n').encode()) == [
        'bad.csv:3: a quote (") on this line opens a value that is never closed: remove the '
        "quote or close it"
    ]


def test_problems_are_capped_and_values_cut():
    rows = "".join(f"{i},x{i},20\n" for i in range(MAX_PROBLEMS + 50))
    got = problems((HEADER + rows).encode(), chunk_rows=64)
    assert len(got) == MAX_PROBLEMS + 1 and got[-1] == "bad.csv: 50 more problems not listed"
    long = "9" * 30 + "z" * 100
    r = read_trace((HEADER + f"0,{long},1\n1,1,1\n").encode(), "bad.csv")
    assert len(r.problems[0].value) == SHOWN_CHARS and r.problems[0].value.endswith("...")


def test_settings_errors():
    with pytest.raises(ValueError, match=r"cutoff_bar \(460\) must be below relief_bar \(450\)"):
        TraceSettings(relief_bar=450.0, cutoff_bar=460.0)
    with pytest.raises(ValueError, match="cutoff_bar needs relief_bar"):
        TraceSettings(cutoff_bar=400.0)
    with pytest.raises(ValueError, match="max_gap_s must be a number > 0"):
        TraceSettings(max_gap_s=0.0)
    with pytest.raises(ValueError, match="chunk_rows must be an integer >= 1"):
        TraceSettings(chunk_rows=0)
    with pytest.raises(ValueError, match="edges must be at least two finite"):
        TraceSettings(edges_bar=(100.0,))


@pytest.mark.parametrize("block", [1, 2, 7, 1 << 22])
def test_rejects_an_overlong_line(monkeypatch, block):
    import monitor.ingest.trace as reader

    monkeypatch.setattr(reader, "_SCAN_BLOCK_BYTES", block)  # line ends split between blocks
    monkeypatch.setattr(reader, "LINE_LIMIT_BYTES", 40)  # a short limit keeps the test small
    head = b"time_s,pressure_a_bar,pressure_b_bar\r\n"  # 36 bytes: within the limit
    long = b"9" * 40
    msg = "line 4 is longer than 40 bytes: a trace has one short row per sample"
    crlf = head + b"0,1,2\r\n1,2,3\r\n2,1," + long + b"\r\n3,1,1\r\n"
    assert problems(crlf) == ["bad.csv:4: " + msg]
    cr_only = head.replace(b"\r\n", b"\r") + b"0,1,2\r1,2,3\r2,1," + long
    assert problems(cr_only) == ["bad.csv:4: " + msg]
    assert read_trace(crlf.replace(long, b"9")).ok


def test_summary_and_histogram_records():
    import json

    t, p, n = stall_trace()
    data = csv_bytes(time_s=t, pressure_a_bar=p, pressure_b_bar=np.full(p.size, 25.0), speed_rpm=n)
    r = read_trace(data, "stall.csv", TraceSettings(relief_bar=450.0))
    s = json.loads(json.dumps(r.summary()))  # plain JSON values
    assert s["samples"] == 401 and s["duration_s"] == pytest.approx(40.0)
    assert s["stalls"]["stalled_at_relief_s"] == pytest.approx(10.0)
    assert s["cutoff_excursions"] is None and s["settings"]["relief_bar"] == 450.0
    start = datetime(2026, 3, 2, 6, 0, tzinfo=UTC)
    hs = read_trace_histograms(r, start)
    assert [h.quantity for h in hs] == ["pressure", "pressure_speed"]
    pressure, matrix = hs
    assert pressure.period_end == datetime(2026, 3, 2, 6, 0, 40, tzinfo=UTC)
    assert pressure.hour_meter_end == pytest.approx(1200.0 + 40.0 / 3600)
    np.testing.assert_array_equal(pressure.pressure_high_bar[:-1], pressure.pressure_low_bar[1:])
    assert pressure.total_hours == pytest.approx(40.0 / 3600)
    assert matrix.hours.shape == (pressure.hours.size, matrix.speed_low_rpm.size)
    # hand-computed mean speed: 5 s at 1000 rpm and 5 s at 1500 rpm over 40 s
    assert pressure.mean_speed_rpm == pytest.approx((5 * 1000 + 5 * 1500) / 40.0)
    with pytest.raises(ValueError, match="started_at must be a timezone-aware datetime"):
        read_trace_histograms(r, None)


def read_trace_histograms(result, started_at):
    from monitor.ingest.trace import trace_histograms

    return trace_histograms(
        result, unit="LR-7", position="left", hour_meter_start=1200.0, started_at=started_at
    )
