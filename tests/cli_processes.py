"""``drivespan`` commands in real, separate processes that start in milliseconds.

A fresh interpreter spends about a second (several on a loaded machine) importing
pandas, SQLAlchemy and the rest before a command runs. The concurrency tests start
dozens of writers, so they are forked from one server process that has imported
those modules once (``multiprocessing``'s ``forkserver`` with a preload list). Each
writer is still its own process: its own interpreter state, its own database
connections, its own store lock, killable with SIGKILL; it runs the same
:func:`monitor.cli.main` as the ``drivespan`` console script.
"""

from __future__ import annotations

import multiprocessing
import os
import sys
import time
from pathlib import Path

PRELOAD = ["tests.cli_processes", "monitor.usecases.telemetry", "monitor.cli", "psycopg"]
"""Modules the fork server imports once; every writer forked from it has them."""

_CONTEXT = None


def context():  # noqa: ANN201 - a multiprocessing context
    """The fork-server context (started on first use, one per test process)."""
    global _CONTEXT
    if _CONTEXT is None:
        _CONTEXT = multiprocessing.get_context("forkserver")
        _CONTEXT.set_forkserver_preload(PRELOAD)
    return _CONTEXT


def run_command(args: list[str], ready: str, go: str, out: str, err: str) -> None:
    """Child: send stdout/stderr to files, say it is ready (touch ``ready``), wait for
    ``go`` to exist, then run ``drivespan ARGS``; the exit code is the command's."""
    os.environ.pop("DRIVESPAN_DB", None)  # every command names its store
    for path, fd in ((out, 1), (err, 2)):
        f = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
        os.dup2(f, fd)
        os.close(f)
    from monitor.cli import main

    Path(ready).touch()
    while not os.path.exists(go):  # noqa: PTH110
        time.sleep(0.002)
    try:
        main(args, prog_name="drivespan")
    finally:
        sys.stdout.flush()
        sys.stderr.flush()


class Command:
    """One forked ``drivespan`` process with a ``subprocess.Popen``-like surface."""

    def __init__(self, args: list[str], ready: Path, go: Path, folder: Path, tag: str) -> None:
        self.out, self.err = folder / f"{tag}.out", folder / f"{tag}.err"
        self.proc = context().Process(
            target=run_command, args=(args, str(ready), str(go), str(self.out), str(self.err))
        )
        self.proc.start()

    def poll(self) -> int | None:
        return self.proc.exitcode

    @property
    def returncode(self) -> int | None:
        return self.proc.exitcode

    def kill(self) -> None:
        self.proc.kill()

    def wait(self, timeout: float | None = None) -> int | None:
        self.proc.join(timeout)
        if self.proc.exitcode is None:
            raise TimeoutError(f"drivespan process still running after {timeout} s")
        return self.proc.exitcode

    def communicate(self, timeout: float | None = None) -> tuple[str, str]:
        self.wait(timeout)
        read = lambda p: p.read_text(errors="replace") if p.exists() else ""  # noqa: E731
        return read(self.out), read(self.err)
