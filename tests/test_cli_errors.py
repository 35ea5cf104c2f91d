"""Every command, given a user's mistake, answers with one line saying what is wrong and a
non-zero exit, never a Python traceback (and a mistyped store is not created)."""

from __future__ import annotations

import os
import zipfile
from pathlib import Path

import pytest
from click.testing import CliRunner

from monitor import cli
from tests.test_engine_e2e import build, standard_files

FUTURE = "2999-01-01T00:00:00Z"


@pytest.fixture(scope="module")
def bad_files(tmp_path_factory) -> dict[str, Path]:
    """Files a user may pass by mistake: binary bytes, a spreadsheet, an empty file."""
    root = tmp_path_factory.mktemp("bad")
    (root / "binary.dat").write_bytes(bytes(range(256)) * 4)
    with zipfile.ZipFile(root / "sheet.xlsx", "w") as zf:  # an .xlsx file is a zip archive
        zf.writestr("[Content_Types].xml", "<Types/>")
    (root / "empty.yaml").write_bytes(b"")
    (root / "folder").mkdir()
    return {p.name: p for p in root.iterdir()}


@pytest.fixture(scope="module")
def store(tmp_path_factory) -> str:
    url = f"sqlite:///{tmp_path_factory.mktemp('store') / 'drivespan.db'}"
    build(url, standard_files())
    return url


STORE_COMMANDS = [
    ["fleet", "show"], ["rank"], ["unit", "PX-1"], ["plan"], ["recompute"], ["calibrate"],
    ["dashboard"],
    ["service", "add", "PX-1", "--position", "left", "--kind", "rebuild", "--at",
     "2026-02-01T00:00:00Z", "--hour-meter", "10"],
]  # fmt: skip
"""Commands that open an existing store (every command but init and demo)."""


def bad_urls(tmp: Path, files: dict[str, Path]) -> list[str]:
    return [
        "sqlite:///relative/missing.db",  # a folder that does not exist, relative
        str(tmp / "no-such-folder" / "x.db"),  # the same as a plain path
        str(tmp / "mistyped.db"),  # a file that does not exist
        "postgresql://nobody@127.0.0.1:1/nodb",  # no server there
        "mysql://user@localhost/db",  # an unsupported database
        "sqlite:////" + str(files["binary.dat"]).lstrip("/"),  # not a database file
        str(files["folder"]),  # a folder
        "://nothing",  # not a URL
    ]


def _fill(arg: str, files: dict[str, Path]) -> str:
    for name, path in files.items():
        arg = arg.replace("{" + name + "}", str(path))
    return arg


def check_refused(args: list[str], **env: str) -> str:
    res = CliRunner().invoke(cli.main, args, env=env or None)
    text = res.output
    assert res.exit_code not in (0, None), f"{args}: accepted\n{text}"
    assert res.exception is None or isinstance(res.exception, SystemExit), (
        f"{args}: raised {res.exception!r}"
    )
    assert "Traceback" not in text, f"{args}:\n{text}"
    said = [ln for ln in text.splitlines() if ln.lower().startswith("error") or ": rejected" in ln]
    assert said, f"{args}: no line says what is wrong\n{text}"
    return text


@pytest.mark.parametrize("command", STORE_COMMANDS, ids=lambda c: " ".join(c[:2]))
def test_every_store_command_refuses_bad_store_urls(command, tmp_path, bad_files):
    for url in bad_urls(tmp_path, bad_files):
        text = check_refused([*command, "--db", url])
        if url.startswith("mysql"):
            assert "SQLite" in text and "PostgreSQL" in text  # says what is supported
    assert not (tmp_path / "mistyped.db").exists()  # never created by mistake


def test_a_missing_default_store_names_the_demo_store(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "drivespan-demo").mkdir()
    (tmp_path / "drivespan-demo" / "demo.db").write_bytes(b"")
    text = check_refused(["rank"], DRIVESPAN_DB="")
    assert "drivespan init" in text and "drivespan-demo/demo.db" in text
    assert not (tmp_path / "drivespan.db").exists()


def test_init_creates_the_store_the_others_then_open(tmp_path):
    url = f"sqlite:///{tmp_path / 'new.db'}"
    assert CliRunner().invoke(cli.main, ["init", "--db", url]).exit_code == 0
    res = CliRunner().invoke(cli.main, ["fleet", "show", "--db", url])
    assert res.exit_code == 1 and "no fleet registry imported yet" in res.output


BAD_ARGUMENTS = [
    ["fleet", "import", "{binary.dat}"],
    ["fleet", "import", "{sheet.xlsx}"],
    ["fleet", "import", "{empty.yaml}"],
    ["ingest", "{binary.dat}"],
    ["ingest", "{sheet.xlsx}"],
    ["plan", "--format", "csv", "--output", "{folder}/missing/plan.csv"],
    ["plan", "--format", "ics"],
    ["plan", "--capacity", "-1"],
    ["plan", "--weeks", "0"],
    ["plan", "--weeks", "100000"],
    ["plan", "--reliability", "120"],
    ["plan", "--as-of", "2026-13-45"],
    ["rank", "--as-of", "yesterday"],
    ["rank", "--site", "Nowhere"],
    ["rank", "--reliability", "50"],
    ["unit", "NO-SUCH-TAG"],
    ["unit", "PX-1", "--as-of", "2026-02-30"],
    ["service", "add", "PX-1", "--position", "left", "--kind", "rebuild", "--at", FUTURE,
     "--hour-meter", "10"],
    ["service", "add", "PX-1", "--position", "left", "--kind", "rebuild", "--at",
     "2026-03-01T00:00:00Z", "--hour-meter", "900000"],
    ["service", "add", "PX-1", "--position", "left", "--kind", "rebuild", "--at", "noon",
     "--hour-meter", "10"],
    ["service", "add", "PX-1", "--position", "left", "--kind", "rebuild", "--at",
     "2026-03-01T00:00:00Z", "--hour-meter", "-5"],
    ["service", "add", "PX-1", "--position", "middle", "--kind", "rebuild", "--at",
     "2026-03-01T00:00:00Z", "--hour-meter", "10"],
    ["service", "add", "PX-1", "--kind", "rebuild", "--at", "2026-03-01T00:00:00Z",
     "--hour-meter", "10"],
    ["calibrate", "--accept", "NO-SUCH-MODEL"],
    ["calibrate", "--undo", "NO-SUCH-MODEL"],
]  # fmt: skip
"""Arguments a user may get wrong, each given with a working store."""


@pytest.mark.parametrize("args", BAD_ARGUMENTS, ids=lambda a: " ".join(a)[:60])
def test_bad_arguments_get_one_line_not_a_traceback(args, store, bad_files):
    args = [_fill(a, bad_files) for a in args]
    check_refused([*args, "--db", store])


@pytest.mark.parametrize(
    "args",
    [["--folder", "{binary.dat}"], ["--scale", "-1"], ["--seed", "x"]],
    ids=lambda a: " ".join(a),
)
def test_demo_refuses_bad_arguments(args, bad_files, tmp_path):
    args = [_fill(a, bad_files) for a in args]
    cwd = os.getcwd()
    os.chdir(tmp_path)
    try:
        check_refused(["demo", "--no-dashboard", *args])
    finally:
        os.chdir(cwd)
