"""End to end: service events with reasons -> lives from the ledger -> Weibull fit ->
``drivespan calibrate`` -> accepting and undoing a life factor.

An invented fleet at the invented "Marrow Bend Depot": three loaders with pump model
KV-60 and one with KW-90, 60 days of daily histograms. Rebuilds and replacements with
reasons are in the registry. The failure and suspension values are summed here by hand
from the stored ledger rows and compared with what the use case assembles.
"""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from click.testing import CliRunner
from sqlalchemy import select

from monitor import cli, fit_weibull, usecases
from monitor.store import db

START = datetime(2026, 1, 1, tzinfo=UTC)
DAYS = 60
AS_OF = "2026-03-02"

# (unit, position, day + fraction, kind, reason or None); hour meter 1000 + 10 h/day.
EVENTS = [
    ("MB-1", "left", 20.5, "rebuild", "failure"),
    ("MB-1", "right", 35.5, "replacement", "failure"),
    ("MB-2", "left", 25.5, "rebuild", "failure"),
    ("MB-2", "right", 30.5, "rebuild", "preventive"),
    ("MB-3", "left", 40.5, "rebuild", "failure"),
    ("MB-3", "left", 50.5, "rebuild", "wear_limit"),
    ("MB-3", "right", 45.5, "rebuild", None),
]
MODELS = {"MB-1": "KV-60", "MB-2": "KV-60", "MB-3": "KV-60", "MB-4": "KW-90"}
# per unit: pressure band [bar] and hours per day of the daily histogram
DUTY = {"MB-1": (330, 370, 10.0), "MB-2": (290, 330, 10.0), "MB-3": (250, 290, 10.0)}
DUTY["MB-4"] = (190, 210, 10.0)


def _iso(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def _model(name: str, rated_l10_h: float) -> str:
    return f"""  - name: {name}
    kind: pump
    displacement_cm3: 60
    rated_dp_bar: 400
    rated_speed_rpm: 2000
    rated_l10_h: {rated_l10_h}
    life_exponent: 3
    relief_bar: 450
"""


def registry() -> str:
    units = []
    for tag, model in MODELS.items():
        service = [
            f'      - {{position: {pos}, kind: {kind}, at: "{_iso(START + timedelta(days=d))}", '
            f"hour_meter: {1000 + 10 * d}{f', reason: {why}' if why else ''}}}"
            for u, pos, d, kind, why in EVENTS
            if u == tag
        ]
        units.append(
            f"""  - tag: {tag}
    site: Marrow Bend Depot
    machine_type: wheel loader
    oil: bend-oil-46
    components:
      - {{position: left, model: {model}}}
      - {{position: right, model: {model}}}
"""
            + ("    service:\n" + "\n".join(service) + "\n" if service else "")
        )
    return (
        "oils:\n  - name: bend-oil-46\n    iso_vg: 46\n    viscosity_index: 100\n"
        "component_models:\n"
        + _model("KV-60", 4000)
        + _model("KW-90", 1250)
        + "sites:\n  - name: Marrow Bend Depot\nunits:\n"
        + "".join(units)
    )


def histograms() -> bytes:
    lines = [
        "unit,position,period_start,period_end,hour_meter_start,hour_meter_end,quantity,"
        "pressure_low_bar,pressure_high_bar,hours,mean_speed_rpm\n"
    ]
    for tag, (lo, hi, h) in DUTY.items():
        for k in range(DAYS):
            t0, t1 = START + timedelta(days=k), START + timedelta(days=k + 1)
            for pos in ("left", "right"):
                lines.append(
                    f"{tag},{pos},{_iso(t0)},{_iso(t1)},{1000 + 10 * k},{1010 + 10 * k},"
                    f"pressure,{lo},{hi},{h},2000\n"
                )
    return "".join(lines).encode()


@pytest.fixture(scope="module")
def fleet_url(tmp_path_factory) -> str:
    url = f"sqlite:///{tmp_path_factory.mktemp('cal') / 'cal.db'}"
    engine = usecases.init_db(url)
    usecases.import_registry(engine, registry(), "bend.yaml")
    res = usecases.upload(engine, histograms(), "days.csv")
    assert res.status == usecases.ACCEPTED, [str(p) for p in res.problems]
    engine.dispose()
    return url


def _hand_lives(url: str) -> dict[tuple[str, str], list[tuple[float, float, str | None]]]:
    """(unit, position) -> [(damage sum, hours sum, reason or None if running)] from the
    raw ledger rows: a row belongs to the first event at or after its period end."""
    engine = db.make_engine(url)
    lg, c, u = db.ledger, db.component, db.unit
    q = (
        select(u.c.tag, c.c.position, lg.c.period_end, lg.c.damage, lg.c.hours)
        .join(c, c.c.id == lg.c.component_id)
        .join(u, u.c.id == c.c.unit_id)
    )
    with engine.connect() as conn:
        rows = conn.execute(q).all()
    engine.dispose()
    out = {}
    for tag in MODELS:
        for pos in ("left", "right"):
            evs = sorted(
                (START + timedelta(days=d), why or "other")
                for t, p, d, _, why in EVENTS
                if (t, p) == (tag, pos)
            )
            bounds = [e[0] for e in evs] + [None]
            lives = []
            for i, end in enumerate(bounds):
                start = bounds[i - 1] if i else None
                mine = [
                    r
                    for r in rows
                    if (r.tag, r.position) == (tag, pos)
                    and (start is None or r.period_end.replace(tzinfo=UTC) > start)
                    and (end is None or r.period_end.replace(tzinfo=UTC) <= end)
                ]
                if mine:
                    reason = evs[i][1] if end is not None else None
                    lives.append((sum(r.damage for r in mine), sum(r.hours for r in mine), reason))
            out[tag, pos] = lives
    return out


def test_lives_equal_the_hand_sums_of_the_ledger_rows(fleet_url):
    hand = _hand_lives(fleet_url)
    got = usecases.lives(db.make_engine(fleet_url))
    assert len(got) == sum(len(v) for v in hand.values()) == 8 + len(EVENTS)
    for (tag, pos), expected in hand.items():
        mine = got[(got["unit"] == tag) & (got["position"] == pos)].sort_values("life")
        assert mine["consumed_fraction"].tolist() == pytest.approx([e[0] for e in expected])
        assert mine["operating_h"].tolist() == pytest.approx([e[1] for e in expected])
        ended = mine["ended"].tolist()
        reasons = [r if e else None for r, e in zip(mine["reason"], ended, strict=True)]
        assert reasons == [e[2] for e in expected]
    # a life of 20 full days before the first event (day 20.5): 20 uploads of 10 h
    first = got[(got["unit"] == "MB-1") & (got["position"] == "left")].iloc[0]
    assert first["operating_h"] == pytest.approx(200.0)


def test_fit_uses_the_hand_failures_and_suspensions(fleet_url):
    hand = _hand_lives(fleet_url)
    kv = [life for (tag, _), lv in hand.items() if MODELS[tag] == "KV-60" for life in lv]
    failures = [d for d, _, why in kv if why == "failure"]
    suspensions = [d for d, _, why in kv if why != "failure"]
    assert len(failures) == 4 and len(suspensions) == 9
    table = usecases.calibrate(db.make_engine(fleet_url), model="KV-60")
    row = table[table["mode"] == "bearing"].iloc[0]
    expected = fit_weibull(failures, suspensions, 0.90)
    assert (row["failures"], row["suspensions"]) == (4, 9)
    assert row["shape"] == pytest.approx(expected.shape, rel=1e-9)
    assert row["b10"] == pytest.approx(expected.b10, rel=1e-9)
    assert row["suggested_life_factor"] == pytest.approx(expected.b10, rel=1e-9)
    wear = table[table["mode"] == "wear_limit"].iloc[0]
    assert wear["failures"] == 1 and "no fit" in wear["note"]


def _calibrate_json(url: str, *args: str) -> list[dict]:
    res = CliRunner().invoke(cli.main, ["calibrate", "--format", "json", "--db", url, *args])
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


def test_cli_json_keys_and_no_suggestion_without_failures(fleet_url):
    rows = _calibrate_json(fleet_url)
    keys = (
        "component_model, site, mode, basis, failures, suspensions, shape, scale, shape_low, "
        "shape_high, scale_low, scale_high, b10, b10_low, b10_high, suggested_life_factor, "
        "suggested_low, suggested_high, note"
    ).split(", ")
    assert rows and all(list(r) == keys for r in rows)
    kw = [r for r in rows if r["component_model"] == "KW-90" and r["mode"] == "bearing"][0]
    assert kw["failures"] == 0 and kw["suggested_life_factor"] is None
    assert "no life factor" in kw["note"]
    res = CliRunner().invoke(cli.main, ["calibrate", "--model", "NOPE", "--db", fleet_url])
    assert res.exit_code == 1 and "not in the registry" in res.output


def _rank(url: str) -> list[dict]:
    res = CliRunner().invoke(cli.main, ["rank", "--as-of", AS_OF, "--format", "json", "--db", url])
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


def test_accept_scales_the_life_and_undo_restores_it_exactly(fleet_url):
    before = _rank(fleet_url)
    factor = _calibrate_json(fleet_url, "--model", "KV-60")[0]["suggested_life_factor"]
    res = CliRunner().invoke(cli.main, ["calibrate", "--accept", "KV-60", "--db", fleet_url])
    assert res.exit_code == 0, res.output
    assert "accepted life factor for KV-60" in res.output
    after = _rank(fleet_url)
    old = {(r["unit"], r["position"]): r for r in before}
    for r in after:
        o = old[r["unit"], r["position"]]
        if r["component_model"] == "KW-90":
            assert r == o
            continue
        # rated L10 x f: every band life x f, so Miner damage and its rate / f and the
        # remaining bearing hours (1 - D/f) / (r/f) = (f - D) / r.
        assert r["consumed_fraction"] == pytest.approx(o["consumed_fraction"] / factor)
        assert r["damage_rate_per_h"] == pytest.approx(o["damage_rate_per_h"] / factor)
        expected = (factor - o["consumed_fraction"]) / o["damage_rate_per_h"]
        assert r["remaining_bearing_h"] == pytest.approx(max(expected, 0.0), abs=1e-6)
    # the ranking follows the new remaining hours: KW-90's drives, ahead of MB-3's
    # before (about 10 000 h against 12 900 h), fall behind every KV-60 drive
    units = [r["unit"] for r in before]
    assert units.index("MB-4") < units.index("MB-3")
    order = [(r["unit"], r["position"]) for r in after]
    assert order[-2:] == [("MB-4", "left"), ("MB-4", "right")]
    assert np.all(np.diff([r["remaining_h"] for r in after]) >= 0)
    # the note says the factor is in force; the registry import does not undo it
    rows = _calibrate_json(fleet_url, "--model", "KV-60")
    assert "in force" in rows[0]["note"]
    engine = db.make_engine(fleet_url)
    usecases.import_registry(engine, registry().replace("4000", "4001"), "bend.yaml")
    usecases.import_registry(engine, registry(), "bend.yaml")
    assert _rank(fleet_url) == after
    shown = CliRunner().invoke(cli.main, ["fleet", "show", "--db", fleet_url]).output
    assert f"KV-60: x {factor:.4g}" in shown and "rated_l10_h: 4000" in shown
    res = CliRunner().invoke(cli.main, ["calibrate", "--undo", "KV-60", "--db", fleet_url])
    assert res.exit_code == 0, res.output
    assert _rank(fleet_url) == before
    res = CliRunner().invoke(cli.main, ["calibrate", "--undo", "KV-60", "--db", fleet_url])
    assert res.exit_code == 1 and "nothing to undo" in res.output
    history = usecases.rating_history(engine)
    assert len(history) == 1 and history["undone_at"].notna().all()
    assert history["factor"].iloc[0] == pytest.approx(factor)


def test_service_add_reason_and_unit_report_lists_it(fleet_url):
    res = CliRunner().invoke(
        cli.main,
        ["service", "add", "MB-4", "--position", "left", "--kind", "rebuild",
         "--at", "2026-03-01T12:00:00Z", "--hour-meter", "1595", "--reason", "preventive",
         "--db", fleet_url],
    )  # fmt: skip
    assert res.exit_code == 0, res.output
    assert "reason preventive" in res.output
    res = CliRunner().invoke(cli.main, ["unit", "MB-3", "--format", "json", "--db", fleet_url])
    history = json.loads(res.stdout)["service_history"]
    assert [h["reason"] for h in history] == ["failure", "other", "wear_limit"]
    res = CliRunner().invoke(cli.main, ["unit", "MB-4", "--format", "json", "--db", fleet_url])
    assert [h["reason"] for h in json.loads(res.stdout)["service_history"]] == ["preventive"]
    res = CliRunner().invoke(
        cli.main,
        ["service", "add", "MB-4", "--kind", "hour_meter_change", "--at", "2026-03-01T13:00:00Z",
         "--hour-meter", "1595", "--new-hour-meter", "0", "--reason", "failure",
         "--db", fleet_url],
    )  # fmt: skip
    assert res.exit_code == 1 and "only to a rebuild or replacement" in res.output
