"""The package installs from a wheel, outside the checkout: `pip wheel .`, install the wheel
into a fresh virtual environment in a temporary folder, then `drivespan init` and
`drivespan demo --no-dashboard` there (migrations and demo data ship inside the wheel)."""

from __future__ import annotations

import os
import site
import subprocess
import sys
import tomllib
import venv
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _run(args: list, cwd: Path, env: dict | None = None) -> subprocess.CompletedProcess:
    out = subprocess.run(args, cwd=cwd, capture_output=True, text=True, timeout=600, env=env)
    assert out.returncode == 0, f"{args}\n{out.stdout[-3000:]}\n{out.stderr[-3000:]}"
    return out


@pytest.fixture(scope="module")
def wheel(tmp_path_factory) -> Path:
    dist = tmp_path_factory.mktemp("dist")
    _run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(dist), str(ROOT)], dist
    )
    (whl,) = dist.glob("drivespan-*.whl")
    return whl


def test_every_package_is_listed_and_shipped(wheel):
    listed = set(
        tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"]
    )
    found = {
        ".".join(p.parent.relative_to(ROOT).parts)
        for top in ("monitor", "dashboards", "demo_fleet")
        for p in (ROOT / top).rglob("__init__.py")
    }
    assert found - listed == set(), "add these packages to [tool.setuptools] packages"
    names = zipfile.ZipFile(wheel).namelist()
    assert "monitor/migrations/env.py" in names and "monitor/migrations/script.py.mako" in names
    assert any(n.startswith("monitor/migrations/versions/0001") for n in names)
    assert not any(n.startswith("tests/") for n in names)


def test_installed_wheel_runs_outside_the_checkout(wheel, tmp_path):
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    py = env_dir / "bin" / "python"
    purelib = Path(
        _run(
            [py, "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"], tmp_path
        ).stdout.strip()
    )
    # The dependencies come from this interpreter's site-packages as a plain path entry, so
    # its .pth files (among them the editable install of this checkout) are not run.
    (purelib / "deps.pth").write_text("\n".join(site.getsitepackages()) + "\n")
    _run(
        [
            sys.executable,
            "-m",
            "pip",
            "install",
            "-q",
            "--no-deps",
            "--target",
            str(purelib),
            str(wheel),
        ],
        tmp_path,
    )
    work = tmp_path / "work"
    work.mkdir()
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "DRIVESPAN_DB")}
    where = _run([py, "-c", "import monitor.cli; print(monitor.cli.__file__)"], work, env).stdout
    assert str(purelib) in where and str(ROOT) not in where
    cli = [py, "-m", "monitor.cli"]  # what the `drivespan` entry point runs
    _run([*cli, "init", "--db", f"sqlite:///{work / 'fleet.db'}"], work, env)
    out = _run([*cli, "demo", "--no-dashboard", "--scale", "0"], work, env)  # story units only
    assert "ranking as of" in out.stdout and "SW-03" in out.stdout, out.stdout[-2000:]
    assert "broken_export.csv: rejected" in out.stdout, out.stdout[-2000:]
    assert (work / "drivespan-demo" / "demo.db").exists()
