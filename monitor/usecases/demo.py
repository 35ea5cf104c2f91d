"""The demo use case: generate the invented demo fleet, ingest it, and hand back the store.

The demo lives in a folder of its own (``./drivespan-demo`` by default) holding a marker
file; a folder without the marker is never overwritten without the caller's consent.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path

from monitor.usecases.common import DomainError, FileResult, init_db
from monitor.usecases.telemetry import upload
from monitor.usecases.traces import ingest_trace

MARKER = ".drivespan-demo"
DEFAULT_FOLDER = Path("drivespan-demo")


@dataclass(frozen=True)
class DemoResult:
    """Where the demo was built and what ingest made of its files."""

    folder: Path
    db_url: str
    as_of: date
    results: tuple[FileResult, ...]
    stories: dict


def folder_is_foreign(folder: Path) -> bool:
    """True when ``folder`` exists, is not empty and was not made by ``drivespan demo``."""
    return folder.exists() and any(folder.iterdir()) and not (folder / MARKER).exists()


def build_demo(
    folder: Path = DEFAULT_FOLDER,
    *,
    seed: int = 7,
    units_scale: float = 1.0,
    years: float = 3.0,
    end_date: date | None = None,
    overwrite_foreign: bool = False,
    progress: Callable[[str, int, int], None] | None = None,
) -> DemoResult:
    """Build a fresh demo database in ``folder`` and return where it is.

    Raises :class:`monitor.service.DomainError` if ``folder`` holds something that is not
    an earlier demo and ``overwrite_foreign`` is False.
    """
    from demo_fleet.generate import generate
    from demo_fleet.traces import write_traces

    folder = Path(folder)
    if folder_is_foreign(folder) and not overwrite_foreign:
        raise DomainError(
            f"{folder} exists and was not made by drivespan demo: choose another folder "
            "with --folder, or confirm to replace it"
        )
    if folder.exists():
        shutil.rmtree(folder)
    folder.mkdir(parents=True)
    (folder / MARKER).write_text("made by drivespan demo; safe to delete\n")
    end = end_date or date.today() - timedelta(days=1)
    fleet = generate(
        folder / "exports", seed=seed, end_date=end, years=years, units_scale=units_scale
    )
    traces = write_traces(folder / "exports", Path(fleet.registry_path), end, seed=seed)
    db_url = f"sqlite:///{(folder / 'demo.db').resolve()}"
    engine = init_db(db_url)
    results = [
        upload(engine, Path(fleet.registry_path).read_bytes(), Path(fleet.registry_path).name)
    ]
    files = [Path(p) for p in fleet.export_paths]
    for i, path in enumerate(files, 1):
        results.append(upload(engine, path.read_bytes(), path.name))
        if progress is not None:
            progress(path.name, i, len(files))
    for path, fields in zip(traces.paths, traces.fields, strict=True):  # a hired-in loader
        results.append(ingest_trace(engine, path.read_bytes(), path.name, **fields))
    broken = Path(fleet.broken_path)  # a faulty export, there to show a rejection
    results.append(upload(engine, broken.read_bytes(), broken.name))
    engine.dispose()
    return DemoResult(
        folder.resolve(), db_url, end + timedelta(days=1), tuple(results), dict(fleet.stories)
    )
