"""The ``plan``, ``dashboard`` and ``demo`` commands (registered on :data:`monitor.cli.main`)."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from monitor import usecases
from monitor.cli import tables
from monitor.cli.common import (
    _as_of,
    _notice,
    db_option,
    domain_errors,
    emit,
    main,
    open_db,
)

PLAN_FORMATS = ("table", "csv", "json", "xlsx", "ics")


@main.command("plan")
@click.option("--as-of", "as_of", metavar="DATE", help="Plan from this day (default today).")
@click.option("--weeks", type=int, help="Horizon in weeks (default: stored setting, 12).")
@click.option("--capacity", type=int, help="Rebuilds the shop can do per week (stored: 3).")
@click.option("--reliability", type=float, help="Planning reliability in % (90-99.95).")
@click.option(
    "--format",
    "fmt",
    type=click.Choice(PLAN_FORMATS),
    default="table",
    show_default=True,
    help="Output format; xlsx and ics need --output.",
)
@click.option(
    "--output",
    type=click.Path(dir_okay=False, path_type=Path),
    help="Write to this file instead of the screen.",
)
@click.option("--save", is_flag=True, help="Store --weeks/--capacity as the shop's settings.")
@db_option
@domain_errors
def plan_cmd(
    as_of: str | None,
    weeks: int | None,
    capacity: int | None,
    reliability: float | None,
    fmt: str,
    output: Path | None,
    save: bool,
    db_url: str,
) -> None:
    """Plan rebuilds week by week within the shop's capacity and exchange-unit stock.

    Earliest due date first; both loops of a machine share one downtime when the second
    falls due within the pairing window. Exchange stock, turnaround and per-site
    capacity are stored settings (see the dashboard's plan page).

    \b
    Example: drivespan plan --weeks 12 --capacity 3 --format ics --output plan.ics
    """
    from monitor.usecases import outputs
    from monitor.usecases import plan as service_plan

    _check_output(fmt, output)
    engine = open_db(db_url)
    if not usecases.has_registry(engine):
        raise usecases.DomainError(
            "no fleet registry imported yet: run drivespan fleet import FILE, then ingest telemetry"
        )
    with _option_names():
        if save:
            given = (("horizon_weeks", weeks), ("capacity_per_week", capacity))
            service_plan.save_plan_settings(engine, {k: v for k, v in given if v is not None})
        plan = service_plan.make_plan(
            engine,
            _as_of(as_of),
            reliability_pct=reliability,
            horizon_weeks=weeks,
            capacity_per_week=capacity,
        )
    if fmt in ("csv", "xlsx", "ics"):
        data = outputs.plan_export_bytes(plan, fmt)
        if output is None:
            click.echo(data.decode("utf-8"), nl=False)
        else:
            output.write_bytes(data)
            n, rest = len(plan.assignments), len(outputs.not_placed_frame(plan))
            click.echo(
                f"plan written to {output} ({n} rebuild{'s' if n != 1 else ''}; "
                f"{rest} drive{'s' if rest != 1 else ''} not placed)"
            )
        return
    if fmt == "json":
        _plan_json(plan, outputs)
        return
    _plan_table(plan, outputs)


def _check_output(fmt: str, output: Path | None) -> None:
    """Refuse a missing --output for file formats, or one in a folder that does not exist,
    before any work is done."""
    if fmt in ("xlsx", "ics") and output is None:
        raise usecases.DomainError(f"--format {fmt} writes a file: add --output FILE")
    if output is not None and not output.resolve().parent.is_dir():
        raise usecases.DomainError(
            f"--output {output}: folder {output.resolve().parent} does not exist; create it "
            "first or name a file in an existing folder"
        )


OPTION_NAMES = {
    "capacity_per_week": "--capacity",
    "horizon_weeks": "--weeks",
    "reliability_pct": "--reliability",
    "as_of": "--as-of",
}
"""The plan's internal setting names and the options a user types for them."""


class _option_names:
    """Re-word a DomainError raised inside so that it names the command's options."""

    def __enter__(self) -> None:
        return None

    def __exit__(self, kind, err, tb) -> bool:  # noqa: ANN001
        if isinstance(err, usecases.DomainError):
            text = str(err)
            for name, option in OPTION_NAMES.items():
                text = text.replace(name, option)
            raise usecases.DomainError(text, err.problems) from None
        return False


def _plan_json(plan, outputs) -> None:  # noqa: ANN001
    """The plan as one JSON object: its settings, the rebuilds and the drives not placed."""
    s = plan.settings
    rebuilds = [
        {k: fleet_plain(v) for k, v in r.items()} | {"iso_week": s.week_label(r["week"])[:8]}
        for r in plan.assignments.to_dict("records")
    ]
    rest = [{k: fleet_plain(v) for k, v in r.items()} for r in
            outputs.not_placed_frame(plan).to_dict("records")]  # fmt: skip
    emit(
        {
            "as_of": s.as_of.isoformat(),
            "first_week_start": s.week_start(0).isoformat(),
            "horizon_weeks": s.horizon_weeks,
            "capacity_per_week": s.capacity_per_week,
            "rebuilds": rebuilds,
            "not_placed": rest,
        },
        "json",
    )


PLAN_TABLE_COLUMNS = {
    "downtime": "Downtime",
    "week": "Week",
    "unit": "Unit",
    "position": "Position",
    "site": "Site",
    "due_date": "Due date",
    "late_days": "Late [days]",
    "paired_with": "With",
}


def _plan_table(plan, outputs) -> None:  # noqa: ANN001
    """The plan for a terminal: summary, rebuilds by week, the drives not placed and why."""
    lines = outputs.plan_summary(plan)
    for line in lines[:-1]:
        click.echo(line)
    rows = []
    for r in plan.assignments.to_dict("records"):
        row = {k: fleet_plain(r[k]) for k in PLAN_TABLE_COLUMNS}
        row["week"] = plan.settings.week_label(r["week"])
        row["late_days"] = row["late_days"] or ""
        rows.append({PLAN_TABLE_COLUMNS[k]: v if v is not None else "" for k, v in row.items()})
    click.echo("")
    click.echo(tables.render(rows, list(PLAN_TABLE_COLUMNS.values())))
    rest = outputs.not_placed_frame(plan)
    if len(rest):
        click.echo(f"\nnot placed ({len(rest)}):")
        for r in rest.itertuples():
            click.echo(f"  {r.unit} {r.position} - {r.not_placed}: {r.reason}")
    click.echo("\n" + lines[-1], err=True)


def fleet_plain(value):  # noqa: ANN001, ANN201
    from monitor import usecases

    return usecases.plain_value(value)


@main.command("dashboard")
@click.option("--port", type=int, default=8501, show_default=True, help="Port to serve on.")
@click.option(
    "--host", default="127.0.0.1", show_default=True, help="Address to bind (loopback by default)."
)
@click.option(
    "--password-file",
    type=click.Path(exists=True, dir_okay=False, path_type=Path),
    help="Ask for the password on the first line of this file before showing any page.",
)
@db_option
@domain_errors
def dashboard_cmd(port: int, host: str, password_file: Path | None, db_url: str) -> None:
    """Serve the Streamlit dashboard on the same store as the CLI (Ctrl+C stops it).

    Bound to 127.0.0.1 it is reachable from this machine only. On another address
    anyone on the network can read and change the fleet data unless --password-file
    is given (and even then the traffic is not encrypted: see README, Security).

    Example: drivespan dashboard --db sqlite:///fleet.db --port 8502
    """
    from dashboards import launch

    password_hash = None
    if password_file is not None:
        password_hash = usecases.hash_password(usecases.read_password_file(password_file))
    open_db(db_url).dispose()
    if not usecases.is_loopback(host):
        _exposed_warning(host, port, password_hash is not None)
    guard = "password required" if password_hash else "no password"
    shown = usecases.display_url(db_url)
    click.echo(f"dashboard on http://{host}:{port}  (store {shown}; {guard}; Ctrl+C to stop)")
    proc = launch.run(db_url, port=port, host=host, password_hash=password_hash)
    try:
        proc.wait()
    except KeyboardInterrupt:
        proc.terminate()
        proc.wait(timeout=10)


DEMO_BROKEN_FILE = "broken_export.csv"
"""The demo's export that is broken on purpose (to show a refused file)."""


def _demo_db_arg(folder: Path) -> str:
    """The demo store as a --db argument: relative to the working folder when inside it."""
    path = (folder / "demo.db").resolve()
    try:
        return str(path.relative_to(Path.cwd()))
    except ValueError:
        return str(path)


DEMO_CONFIDENCE = 0.90
"""Two-sided confidence level of the interval in the demo's calibration line [-]."""


def _calibration_line(engine) -> str:  # noqa: ANN001
    """One line naming the calibration finding: the model with the lowest suggested life
    factor, or why there is none."""
    table = usecases.calibrate(engine, confidence=DEMO_CONFIDENCE)
    rows = table[(table["mode"] == "bearing") & table["suggested_life_factor"].notna()]
    if rows.empty:
        return "calibration: no component model has enough failures for a life factor yet"
    row = rows.loc[rows["suggested_life_factor"].astype(float).idxmin()]
    factor = float(row["suggested_life_factor"])
    low, high = float(row["suggested_low"]), float(row["suggested_high"])
    verdict = "fails short of its rating" if factor < 1.0 else "lives up to its rating"
    return (
        f"calibration: {row['component_model']} {verdict}: field B10 "
        f"{factor:.2f} x the rated life ({DEMO_CONFIDENCE:.0%} interval {low:.2f}-{high:.2f}, "
        f"{row['failures']} failures, {row['suspensions']} suspensions); an estimate, "
        "the maker's ratings and a qualified engineer decide"
    )


def _exposed_warning(host: str, port: int, has_password: bool) -> None:
    """A loud note on stderr when the dashboard listens beyond this machine."""
    if has_password:
        click.secho(
            f"note: the dashboard listens on {host}:{port} beyond this machine; it asks for "
            "the password, but the traffic (password included) is not encrypted: use a "
            "reverse proxy with TLS for anything but a trusted network (README, Security)",
            err=True,
            fg="yellow",
        )
        return
    click.secho(
        f"WARNING: the dashboard listens on {host}:{port} WITHOUT A PASSWORD: anyone who can "
        "reach this machine can read the fleet data and upload files into the store. "
        "Use --password-file FILE, or keep --host 127.0.0.1 behind a reverse proxy with "
        "real authentication (README, Security).",
        err=True,
        fg="red",
        bold=True,
    )


@main.command("demo")
@click.option(
    "--folder",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("drivespan-demo"),
    show_default=True,
    help="Folder for the demo data and database.",
)
@click.option("--seed", type=int, default=7, show_default=True, help="Generator seed.")
@click.option(
    "--scale",
    type=float,
    default=1.0,
    show_default=True,
    help="Fleet size factor (story units are always kept).",
)
@click.option("--no-dashboard", is_flag=True, help="Print the ranking and stop.")
@click.option("--port", type=int, default=8501, show_default=True, help="Dashboard port.")
@click.option("--yes", is_flag=True, help="Replace --folder even if drivespan did not make it.")
@domain_errors
def demo_cmd(
    folder: Path, seed: int, scale: float, no_dashboard: bool, port: int, yes: bool
) -> None:
    """Build the invented demo fleet, ingest it, print the ranking and open the dashboard.

    The demo gets its own folder and SQLite database; your own database is never touched.

    Example: drivespan demo --no-dashboard
    """
    import time

    from monitor.usecases import demo

    if demo.folder_is_foreign(folder) and not yes:
        if not sys.stdin.isatty() or not click.confirm(
            f"{folder} was not made by drivespan demo; replace it?", default=False
        ):
            raise usecases.DomainError(
                f"{folder} exists and was not made by drivespan demo: pass --folder NEW or --yes"
            )
        yes = True
    t0 = time.perf_counter()
    with click.progressbar(length=1, label="generating and ingesting", file=sys.stderr) as bar:

        def progress(_name: str, done: int, total: int) -> None:
            bar.length = total
            bar.update(done - bar.pos)

        res = demo.build_demo(
            folder, seed=seed, units_scale=scale, overwrite_foreign=yes, progress=progress
        )
    rejected = [r for r in res.results if r.status == usecases.REJECTED]
    accepted = sum(r.status == usecases.ACCEPTED for r in res.results)
    click.echo(
        f"demo fleet in {res.folder} ({time.perf_counter() - t0:.0f} s): "
        f"{accepted} files accepted, {len(rejected)} rejected"
    )
    for r in rejected:
        on_purpose = r.name == DEMO_BROKEN_FILE
        click.echo(r.summary + (" - broken on purpose, to show how a bad file is refused"
                                if on_purpose else ""))  # fmt: skip
        for p in r.problems:
            click.echo(f"  {p}")
    engine = usecases.init_db(res.db_url)
    df = usecases.fleet_status(engine, res.as_of)
    records = usecases.rank_records(df)
    click.echo(f"\nranking as of {res.as_of.isoformat()} (top 15 of {len(records)} drives):")
    rows = [tables.rank_row(r) for r in records[:15]]
    click.echo(tables.render(rows, list(tables.RANK_TABLE.values())))
    click.echo("\n" + tables.status_counts(records))
    _notice()
    click.echo(f"\n{_calibration_line(engine)}")
    db = _demo_db_arg(res.folder)
    click.echo(f"\nmore: drivespan rank --db {db} --as-of {res.as_of.isoformat()}")
    click.echo(f"      drivespan unit GQ-02 --db {db} --as-of {res.as_of.isoformat()}")
    click.echo(f"      drivespan calibrate --db {db}")
    if no_dashboard:
        return
    from dashboards import launch

    click.echo(f"dashboard on http://127.0.0.1:{port}  (Ctrl+C to stop)")
    proc = launch.run(res.db_url, port=port)
    try:
        proc.wait()
    except KeyboardInterrupt:
        proc.terminate()
        proc.wait(timeout=10)
