"""A throwaway PostgreSQL 15 cluster for tests and benchmarks.

Debian's server binaries live in /usr/lib/postgresql/15/bin. ``initdb`` refuses to
run as root, so when we are root the cluster is created and run as ``postgres``.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import tempfile
import time
from pathlib import Path

PG_BIN = Path(os.environ.get("DRIVESPAN_PG_BIN", "/usr/lib/postgresql/15/bin"))


def available() -> bool:
    return (PG_BIN / "initdb").exists() and (PG_BIN / "pg_ctl").exists()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _as_cluster_user(args: list[str]) -> list[str]:
    if os.geteuid() == 0:
        return ["runuser", "-u", "postgres", "--", *args]
    return args


class Cluster:
    """Start with :meth:`start`, stop with :meth:`stop`; ``url`` is the SQLAlchemy URL."""

    def __init__(self) -> None:
        self.root = Path(tempfile.mkdtemp(prefix="drivespan-pg-"))
        self.data = self.root / "data"
        self.port = _free_port()
        self.url = f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/postgres"

    def _run(self, args: list[str]) -> None:
        proc = subprocess.run(_as_cluster_user(args), capture_output=True, text=True)
        if proc.returncode != 0:
            raise RuntimeError(f"{args[0]} failed: {proc.stdout}\n{proc.stderr}")

    def start(self) -> Cluster:
        if os.geteuid() == 0:
            shutil.chown(self.root, "postgres", "postgres")
        os.chmod(self.root, 0o700)
        self._run(
            [
                str(PG_BIN / "initdb"),
                "-D",
                str(self.data),
                "-U",
                "postgres",
                "-A",
                "trust",
                "-E",
                "UTF8",
                "--no-sync",
            ]
        )
        opts = (
            f"-p {self.port} -k {self.root} -c listen_addresses=127.0.0.1 "
            "-c fsync=off -c synchronous_commit=off -c full_page_writes=off"
        )
        self._run(
            [
                str(PG_BIN / "pg_ctl"),
                "-D",
                str(self.data),
                "-o",
                opts,
                "-l",
                str(self.root / "log"),
                "-w",
                "-t",
                "60",
                "start",
            ]
        )
        deadline = time.time() + 30
        while time.time() < deadline:
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=1).close()
                return self
            except OSError:
                time.sleep(0.2)
        raise RuntimeError("PostgreSQL did not start listening")

    def create_database(self, name: str) -> str:
        import psycopg

        with psycopg.connect(
            f"host=127.0.0.1 port={self.port} user=postgres dbname=postgres", autocommit=True
        ) as conn:
            conn.execute(f'CREATE DATABASE "{name}"')
        return f"postgresql+psycopg://postgres@127.0.0.1:{self.port}/{name}"

    def stop(self) -> None:
        try:
            self._run([str(PG_BIN / "pg_ctl"), "-D", str(self.data), "-m", "fast", "-w", "stop"])
        finally:
            shutil.rmtree(self.root, ignore_errors=True)
