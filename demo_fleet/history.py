"""Day-by-day history of one demo unit: engine hours, logged spectra, damage, rebuilds.

Everything is vectorised over the days of the window; only the rebuild schedule is a
short loop over events (a few per unit at most).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq
from scipy.stats import theilslopes

from demo_fleet import duty, oil_samples
from demo_fleet.scenario import (
    BEARING_ROLE_LIFE_H,
    DUE_ROLES,
    MODELS_BY_NAME,
    NEAR_END_POSITION,
    REBUILT_RECENTLY_POSITION,
    DueRole,
    UnitPlan,
)

HOURS_FACTOR = {"crawler dozer": 0.85, "trencher": 0.8, "tracked dumper": 0.9}
"""Engine hours of a machine type relative to its site's typical day [-]."""

REBUILD_DAMAGE = (0.6, 0.85)
"""Consumed bearing life at which the shop rebuilds a component [-] (invented policy)."""
REBUILD_WEAR = 0.95
"""Share of the case-drain limit at which the shop rebuilds a component [-]."""
COMPANION_DAMAGE = 0.6
"""A second loop past this consumed life is rebuilt in the same downtime [-]."""
WEAR_EXPONENT = 1.3
"""Normalised leakage grows as new * offset * (1 + w ** WEAR_EXPONENT) [-]."""
NEAR_END_CONSUMED = 0.935
"""Bearing life the near-end conveyor has consumed since its last rebuild [-]."""
NEAR_END_TARGET_LIFE_H = 9000.0
"""Expected bearing life under its duty of the near-end conveyor pump [h]."""
CONTAMINATED_REMAINING_H = (700.0, 1250.0)
"""Hours the contaminated unit's loops have left on their case-drain trend [h]."""
SILENT_DAYS = 42
"""Days before the end date from which the silent unit's uploads stop arriving."""
BACKLOG_GAP_DAYS = 90
"""A unit with due roles gets no automatic rebuild in the days before its last
role rebuild [d], so its service history does not show two rebuilds in a row."""
FIELD_B10 = {"DS-P46": 1.0, "DS-P90": 0.2, "DS-M110": 1.0}
"""B10 of the consumed bearing life at which a component of each model really fails [-]
(invented field behaviour): 1.0 means the rating is right; DS-P90 pumps built with a batch
of undersized swashplate saddle bushes fail at about a fifth of their rated life."""
FIELD_SHAPE = 1.5
"""Weibull shape of those field failures [-] (invented)."""
RATE_WINDOW_H = 500.0
"""Operating hours over which a due role's recent damage rate is taken [h] (the
ledger's default rate window, DESIGN.md)."""


@dataclass
class PositionHistory:
    """One drive position of a unit over the window.

    ``counts`` are ticks of 0.01 h per pressure band (days, K) or per pressure x speed
    cell (days, K, S); ``speed_rpm`` the day's mean speed [rpm] (None for a matrix).
    """

    position: str
    model: dict
    quantity: str
    counts: np.ndarray
    speed_rpm: np.ndarray | None
    wear_life_h: float
    serial: str
    damage: np.ndarray = field(default_factory=lambda: np.zeros(0))
    wear_mult: np.ndarray = field(default_factory=lambda: np.zeros(0))
    offsets: list[float] = field(default_factory=list)


@dataclass
class Event:
    """A rebuild or exchange of one position on day index ``day`` at ``hour`` UTC."""

    position: str
    day: int
    kind: str
    hour: int
    check_day: int = -1
    """Day of the case-drain check a few days after the rebuild (-1: none)."""
    check_noise: float = 1.0
    """Measurement error of that check's reading of this position [-]."""
    reason: str = "preventive"
    """Why the life ended: failure, wear_limit or preventive."""


@dataclass
class UnitHistory:
    """Everything generated for one unit."""

    plan: UnitPlan
    tenths: np.ndarray
    meter0_tenths: int
    positions: list[PositionHistory]
    events: list[Event]
    upload: np.ndarray
    contamination: tuple[int, int] | None = None
    visits: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    codes: list[str] = field(default_factory=list)
    visit_noise: dict[str, np.ndarray] = field(default_factory=dict)

    def meter_start_tenths(self) -> np.ndarray:
        """Hour meter at the start of each day [0.1 h]."""
        return self.meter0_tenths + np.concatenate(([0], np.cumsum(self.tenths)[:-1]))


def _damage(pos: PositionHistory, hist: UnitHistory) -> np.ndarray:
    """Miner damage of each day [-] with life model v1 (band midpoints).

    Pressure spectra carry the ISO 281 oil-condition factor at the fleet oil's chosen
    level (:mod:`demo_fleet.oil_samples`); pressure x speed matrices are logged only by the
    motors, whose model has no bearing data (factor 1).
    """
    model = pos.model
    hours = pos.counts / 100.0
    if pos.quantity == "pressure":
        ec = np.full(hours.shape[0], np.nan)
        if "bearing" in model:
            pitch = model["bearing"]["pitch_diameter_mm"]
            ec[:] = oil_samples.level_ec(pitch)
        a_oil = oil_samples.oil_life_factor(model, pos.speed_rpm, ec)
        ratio = pos.speed_rpm / model["rated_speed_rpm"]
        per_hour = duty.damage_per_hour(model, ratio, 1.0 / a_oil)
        return np.einsum("dk,dk->d", hours, per_hour)
    per_hour = duty.damage_per_hour(model, duty.SPEED_MID_RPM / model["rated_speed_rpm"])
    return np.einsum("dks,sk->d", hours, per_hour)


def _roles(plan: UnitPlan) -> tuple[DueRole, ...]:
    return DUE_ROLES.get(plan.tag, ())


def _spectra(plan: UnitPlan, rng: np.random.Generator, tenths: np.ndarray) -> list:
    """Draw each position's daily spectrum; motors share their loop's pressure counts."""
    out: list[PositionHistory] = []
    n = tenths.size
    lo_life, hi_life = plan.machine.target_life_h
    loop_counts = None
    for position, model_name, duty_name, speed_kind in plan.machine.positions:
        model = MODELS_BY_NAME[model_name]
        serial = f"S{int(rng.integers(100000, 999999))}"
        wear_life = float(rng.uniform(*plan.machine.wear_life_h))
        if speed_kind == "motor_matrix":
            share = rng.dirichlet(60.0 * duty.SPEED_SHARE, n)
            pvals = np.broadcast_to(share[:, None, :], loop_counts.shape + share.shape[-1:])
            counts = rng.multinomial(loop_counts, pvals).astype(np.int64)
            out.append(
                PositionHistory(position, model, "pressure_speed", counts, None, wear_life, serial)
            )
            continue
        speed = duty.daily_speed(rng, speed_kind, n)
        if speed_kind != "motor":
            working, (lo_share, hi_share) = duty.DUTIES[duty_name]
            share = rng.uniform(lo_share, hi_share)
            if plan.story == "stalling_loader":
                share = duty.STALL_SHARE
            mean_speed = float(np.mean(speed))
            ratio = mean_speed / model["rated_speed_rpm"]
            target = rng.uniform(lo_life, hi_life)
            if plan.story == "near_end_conveyor" and position == NEAR_END_POSITION:
                target = NEAR_END_TARGET_LIFE_H
            if any(r.position == position and r.mode == "bearing" for r in _roles(plan)):
                target = BEARING_ROLE_LIFE_H
            inverse = oil_samples.expected_inverse_factor(model, mean_speed)
            scale = duty.calibrate_scale(working, share, model, ratio, target, inverse)
            probs = duty.band_probabilities(working, scale, share, model)
            loop_counts = duty.daily_band_hours(rng, probs, tenths * 10)
        out.append(
            PositionHistory(position, model, "pressure", loop_counts, speed, wear_life, serial)
        )
    return out


def _wear_state(pos: PositionHistory, tenths: np.ndarray, start: int) -> np.ndarray:
    """Wear variable w at the start of each day from ``start`` on [-]."""
    rate = tenths[start:] / 10.0 * pos.wear_mult[start:] / pos.wear_life_h
    return np.concatenate(([0.0], np.cumsum(rate)[:-1]))


def _trigger(
    pos: PositionHistory, tenths: np.ndarray, start: int, threshold: float, fails_at: float
) -> tuple[int, str]:
    """First day index from ``start`` on where damage, wear or a failure calls for a
    rebuild (-1: none), and the reason (preventive, wear_limit or failure)."""
    cum = np.cumsum(pos.damage[start:])
    i_dmg = int(np.searchsorted(cum, threshold))
    q_ratio = pos.offsets[-1] * (1.0 + _wear_state(pos, tenths, start) ** WEAR_EXPONENT)
    limit = pos.model["case_drain"]["limit_factor"] * REBUILD_WEAR
    over = np.flatnonzero(q_ratio >= limit)
    i_wear = int(over[0]) if over.size else cum.size
    i_fail = int(np.searchsorted(cum, fails_at))
    first, reason = min((i_fail, "failure"), (i_wear, "wear_limit"), (i_dmg, "preventive"))
    return (start + first, reason) if first < cum.size else (-1, reason)


def failure_fraction(model: dict, rng: np.random.Generator) -> float:
    """Consumed bearing life at which this life of a ``model`` component fails [-].

    Weibull with shape :data:`FIELD_SHAPE` and B10 :data:`FIELD_B10`:
    scale = B10 / (-ln 0.9) ** (1 / shape).
    """
    b10 = FIELD_B10.get(model["name"], 1.0)
    return float(b10 / (-np.log(0.9)) ** (1.0 / FIELD_SHAPE) * rng.weibull(FIELD_SHAPE))


def _apply_downtime(hist: UnitHistory, first: int, days: int) -> None:
    """Zero the unit's hours (all positions) for ``days`` days from ``first``."""
    sl = slice(first, first + days)
    hist.tenths[sl] = 0
    for pos in hist.positions:
        pos.counts[sl] = 0
        pos.damage[sl] = 0.0


def _rebuild(
    hist: UnitHistory,
    rng: np.random.Generator,
    pos: PositionHistory,
    day: int,
    life_start: dict[str, int],
    reason: str = "preventive",
) -> None:
    kind = "replacement" if rng.random() < 0.35 else "rebuild"
    if kind == "replacement":
        pos.serial = f"S{int(rng.integers(100000, 999999))}"
    hour, check = int(rng.integers(10, 16)), day + int(rng.integers(2, 6))
    same_day = [e.check_day for e in hist.events if e.day == day]
    check = same_day[0] if same_day else check  # one check visit for the unit
    noise = 1.0 + float(rng.normal(0.0, oil_samples.NOISE_SD))
    hist.events.append(Event(pos.position, day, kind, hour, check, noise, reason))
    pos.offsets.append(float(rng.uniform(0.9, 1.15)))
    life_start[pos.position] = day


def schedule_rebuilds(
    hist: UnitHistory,
    rng: np.random.Generator,
    auto_until: int,
    forced: list[tuple[int, str]],
    fail_rng: np.random.Generator | None = None,
) -> None:
    """Rebuild components as the shop would: when consumed life or case drain calls for it,
    or when the component fails first.

    Auto rebuilds are planned 2-8 days after the trigger, stop the machine 1-3 days, and
    take along another loop that is past ``COMPANION_DAMAGE``; a failure (drawn per life
    from ``fail_rng`` with :func:`failure_fraction`; none without it) is rebuilt the next
    day. ``forced`` (day, position) events are story rebuilds on given days (one day
    downtime, reason preventive).
    """
    n = hist.tenths.size
    life_start = {p.position: 0 for p in hist.positions}
    thresholds = {p.position: float(rng.uniform(*REBUILD_DAMAGE)) for p in hist.positions}

    def draw_failure(pos: PositionHistory) -> float:
        return np.inf if fail_rng is None else failure_fraction(pos.model, fail_rng)

    fails_at = {p.position: draw_failure(p) for p in hist.positions}
    pending = sorted(forced)
    last = -1
    while True:
        cands = [(d, p, True, "preventive") for d, p in pending[:1]]
        for pos in hist.positions:
            start = life_start[pos.position]
            t, why = _trigger(
                pos, hist.tenths, start, thresholds[pos.position], fails_at[pos.position]
            )
            if 0 <= t < auto_until:
                delay = 1 if why == "failure" else int(rng.integers(2, 9))
                cands.append((max(t + delay, last + 1), pos.position, False, why))
        if not cands or min(cands)[0] >= n:
            return
        day, position, is_forced, reason = min(cands)
        if is_forced:
            pending.pop(0)
        _apply_downtime(hist, day, 1 if is_forced else int(rng.integers(1, 4)))
        done = [position]
        if not is_forced:
            done += [
                o.position
                for o in hist.positions
                if o.position != position
                and o.damage[life_start[o.position] : day].sum() > COMPANION_DAMAGE
            ]
        for pos in hist.positions:
            if pos.position in done:
                why = reason if pos.position == position else "preventive"
                _rebuild(hist, rng, pos, day, life_start, why)
                thresholds[pos.position] = float(rng.uniform(*REBUILD_DAMAGE))
                fails_at[pos.position] = draw_failure(pos)
        last = day


def near_end_rebuild_day(pos: PositionHistory, consumed: float) -> int | None:
    """Latest day whose following days add up to at least ``consumed`` damage [-]."""
    suffix = np.cumsum(pos.damage[::-1])[::-1]  # suffix[d] = damage of days d..end
    after = np.concatenate((suffix[1:], [0.0]))  # damage after day d
    ok = np.flatnonzero(after >= consumed)
    return int(ok[-1]) if ok.size else None


def _ensure_recent(tenths: np.ndarray, days: np.ndarray) -> None:
    """Give a unit some hours in its last working days if it has none in the last 10.

    Keeps the silent unit the only one whose uploads stop before the end date.
    """
    if tenths.size >= 10 and tenths[-10:].sum() == 0:
        weekday = (days[-10:].astype(np.int64) + 3) % 7
        tenths[-10:] = np.where(weekday < 5, 40, 0)


def _story_setup(hist: UnitHistory, n: int) -> tuple[int, list[tuple[int, str]]]:
    """Story rebuilds and the last day auto rebuilds may trigger, for one unit."""
    story = hist.plan.story
    if story == "near_end_conveyor":
        pos = next(p for p in hist.positions if p.position == NEAR_END_POSITION)
        day = near_end_rebuild_day(pos, consumed=NEAR_END_CONSUMED)
        return 0, ([] if day is None else [(day, NEAR_END_POSITION)])
    if story == "rebuilt_recently":
        return max(0, n - 300), [(max(0, n - 30), REBUILT_RECENTLY_POSITION)]
    if story == "contaminated":
        rebuilt, (onset, _) = _contamination_days(n)
        for pos in hist.positions:
            pos.wear_mult[onset:] = 6.0
        return 0, [(rebuilt, p.position) for p in hist.positions]
    return n, []


def _contamination_days(n: int) -> tuple[int, tuple[int, int]]:
    """Day of the contaminated unit's rebuild and its (first, last + 1) dirty days."""
    rebuilt = max(0, n - min(600, int(0.6 * n)))
    onset = max(rebuilt + 1, n - min(420, int(0.45 * n)))
    return rebuilt, (onset, min(n, onset + 56))


def recent_damage_rate(pos: PositionHistory, tenths: np.ndarray) -> float:
    """Damage per operating hour over the last :data:`RATE_WINDOW_H` hours [1/h]."""
    hours = np.cumsum(tenths[::-1]) / 10.0
    k = int(np.searchsorted(hours, RATE_WINDOW_H)) + 1
    total = hours[min(k, hours.size) - 1]
    return float(pos.damage[::-1][:k].sum() / total) if total > 0 else 0.0


def _role_setup(
    hist: UnitHistory, n: int, auto_until: int, forced: list[tuple[int, str]]
) -> tuple[int, list[tuple[int, str]]]:
    """Rebuild days and wear lives of the unit's due roles (see scenario.DueRole)."""
    for role in _roles(hist.plan):
        pos = next(p for p in hist.positions if p.position == role.position)
        if role.mode == "bearing":
            rate = recent_damage_rate(pos, hist.tenths)
            day = near_end_rebuild_day(pos, 1.0 - role.remaining_h * rate)
            start = 0 if day is None else day
        else:
            day = None if role.since_days is None else max(1, n - role.since_days)
            start = 0 if day is None else day
            calibrate_wear_life(hist, pos, start, role.remaining_h)
        if day is not None:
            forced.append((day, role.position))
        auto_until = min(auto_until, max(0, start - BACKLOG_GAP_DAYS))
    return auto_until, sorted(forced)


def _wear_points(hist: UnitHistory, pos: PositionHistory, start: int):
    """Hours since ``start``, wear exposure [h] and measurement error [-] at the visits
    of the current life, and the hours from ``start`` to the end [h]."""
    keep = hist.visits > start if start > 0 else np.ones(hist.visits.size, dtype=bool)
    in_life, noise = hist.visits[keep], hist.visit_noise[pos.position][keep]
    checks = [
        (e.check_day, e.check_noise)
        for e in hist.events
        if e.position == pos.position and e.day == start and 0 <= e.check_day < hist.tenths.size
    ]
    for day, err in checks:
        if day not in in_life:
            in_life, noise = np.append(in_life, day), np.append(noise, err)
    tenths = hist.tenths.copy()
    if start > 0:
        tenths[start] = 0  # the rebuild day is downtime
    hours = np.concatenate(([0.0], np.cumsum(tenths / 10.0)))
    exposure = np.concatenate(([0.0], np.cumsum(tenths / 10.0 * pos.wear_mult)))
    return (
        hours[in_life] - hours[start],
        exposure[in_life] - exposure[start],
        noise,
        hours[-1] - hours[start],
    )


def trend_remaining_h(
    x_h: np.ndarray,
    exposure_h: np.ndarray,
    noise: np.ndarray,
    now_h: float,
    wear_life_h: float,
    limit: float,
) -> float:
    """Hours to the limit [h] of a Theil-Sen line through the normalised readings.

    Readings are ``(1 + (exposure / wear_life) ** WEAR_EXPONENT) * noise`` (as-new = 1,
    limit in the same ratio); the line is evaluated at ``now_h`` as drivespan does
    (DESIGN.md, "Case drain").
    """
    y = (1.0 + (exposure_h / wear_life_h) ** WEAR_EXPONENT) * noise
    slope, intercept, _, _ = theilslopes(y, x_h)
    return (limit - (intercept + slope * now_h)) / slope if slope > 0 else np.inf


def calibrate_wear_life(
    hist: UnitHistory, pos: PositionHistory, start: int, remaining_h: float
) -> None:
    """Set the wear life [h] so the case-drain trend at the end leaves ``remaining_h``.

    The current life's as-new offset is taken as 1 (set after the rebuilds are
    scheduled, see :func:`simulate_unit`); Brent's method on log(wear life).
    """
    x, exposure, noise, now = _wear_points(hist, pos, start)
    limit = pos.model["case_drain"]["limit_factor"]
    if x.size < 3:
        return

    def gap(log_life: float) -> float:
        life = float(np.exp(log_life))
        return trend_remaining_h(x, exposure, noise, now, life, limit) - remaining_h

    lo, hi = np.log(50.0), np.log(1e7)
    if gap(lo) * gap(hi) < 0:  # else the target cannot be met: keep the drawn life
        pos.wear_life_h = float(np.exp(brentq(gap, lo, hi, xtol=1e-6)))


def simulate_unit(
    plan: UnitPlan, seed: int, days: np.ndarray, saturdays: np.ndarray, meter0_tenths: int
) -> UnitHistory:
    """Generate the whole history of one unit (deterministic for ``seed`` and ``plan``)."""
    rng = np.random.default_rng([seed, plan.index])
    n = days.size
    tenths = duty.unit_daily_tenths(
        rng, days, plan.site.calendar, saturdays, HOURS_FACTOR.get(plan.machine.name, 1.0)
    )
    if plan.story != "silent":
        _ensure_recent(tenths, days)
    positions = _spectra(plan, rng, tenths)
    hist = UnitHistory(plan, tenths, meter0_tenths, positions, [], np.ones(n, dtype=bool))
    if plan.story == "contaminated":
        hist.contamination = _contamination_days(n)[1]
    oil_rng = np.random.default_rng([seed, 40_000 + plan.index])
    hist.visits = oil_samples.visit_days(oil_rng, days)
    hist.codes = oil_samples.sample_codes(oil_rng, hist.visits, hist.contamination)
    hist.visit_noise = {
        p.position: 1.0 + oil_rng.normal(0.0, oil_samples.NOISE_SD, hist.visits.size)
        for p in positions
    }
    for pos in positions:
        pos.damage = _damage(pos, hist)
        pos.wear_mult = np.ones(n)
        pos.offsets = [float(rng.uniform(0.9, 1.15))]
    auto_until, forced = _story_setup(hist, n)
    auto_until, forced = _role_setup(hist, n, auto_until, forced)
    fail_rng = np.random.default_rng([seed, 80_000 + plan.index])
    schedule_rebuilds(hist, rng, auto_until, forced, fail_rng)
    _finish_wear_lives(hist)
    if plan.story == "silent":
        hist.upload[max(0, n - SILENT_DAYS) :] = False
    return hist


def _life_start(hist: UnitHistory, position: str) -> int:
    return max((e.day for e in hist.events if e.position == position), default=0)


def _finish_wear_lives(hist: UnitHistory) -> None:
    """Calibrate the wear lives again now that the rebuilds and their checks are known.

    Wear roles keep their target; the contaminated unit's loops end about
    :data:`CONTAMINATED_REMAINING_H` hours from their case-drain limit. The current
    life's as-new offset is 1, as the calibration assumes.
    """
    targets = {r.position: r.remaining_h for r in _roles(hist.plan) if r.mode == "wear"}
    if hist.plan.story == "contaminated":
        targets = dict(
            zip((p.position for p in hist.positions), CONTAMINATED_REMAINING_H, strict=True)
        )
        for pos in hist.positions:
            pos.offsets = [1.0] * len(pos.offsets)
    for pos in hist.positions:
        if pos.position in targets:
            pos.offsets[-1] = 1.0
            start = _life_start(hist, pos.position)
            calibrate_wear_life(hist, pos, start, targets[pos.position])
