"""Starting on one's own reserve from the command line: --db anywhere, blank set-up files that load,
listings, adding a station, and every hint the tool prints being a command that works."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import click
import pytest

from monitor.cli.main import cli, main
from tests.conftest import REPO_ROOT, table_counts


def test_db_before_and_after_the_command(tmp_path, capsys):
    after = tmp_path / "after.sqlite"
    before = tmp_path / "before.sqlite"
    assert main(["init", "--db", str(after)]) == 0
    assert main(["--db", str(before), "init"]) == 0
    assert after.is_file() and before.is_file()
    # a nested command too, and the value after the command wins over the one before it
    blank = tmp_path / "blank"
    assert main(["setup", "blank", str(blank)]) == 0
    assert main(["--db", str(before), "setup", "all", str(blank), "--db", str(after)]) == 0
    capsys.readouterr()
    assert main(["species", "list", "--db", str(after), "--csv"]) == 0
    assert "MARVIO" in capsys.readouterr().out
    assert main(["--db", str(before), "species", "list"]) == 1  # nothing set up in `before`
    assert "monitor setup all" in capsys.readouterr().err


def test_blank_setup_files_load_and_list(tmp_path, capsys):
    db = str(tmp_path / "r.sqlite")
    assert main(["setup", "blank", str(tmp_path / "mine")]) == 0
    names = sorted(p.name for p in (tmp_path / "mine").iterdir())
    assert names == sorted(["programme.json", "sites.geojson", "stations.csv", "species.csv", "panels.csv",
                            "windows.csv", "observers.csv", "management_events.csv"])
    for name in names:
        if name.endswith(".csv"):
            assert len((tmp_path / "mine" / name).read_text().splitlines()) == 2  # header and one example
    assert main(["init", "--db", db]) == 0
    assert main(["setup", "all", str(tmp_path / "mine"), "--db", db]) == 0
    capsys.readouterr()
    assert main(["sites", "list", "--db", db, "--json"]) == 0
    assert '"name": "Stream Meadow"' in capsys.readouterr().out
    assert main(["station", "list", "--db", db]) == 0
    out = capsys.readouterr().out
    assert "SM-01" in out and "512210" in out and "512,210" not in out


def test_station_add_is_checked_like_a_file_row_and_logged(programme_db, capsys):
    assert main(["station", "add", "SM-90", "--site", "SM", "--x", "512210", "--y", "5742010", "--panel", "ANNUAL",
                 "--db", programme_db]) == 0
    capsys.readouterr()
    assert main(["station", "history", "SM-90", "--db", programme_db]) == 0
    assert main(["station", "list", "--site", "SM", "--db", programme_db, "--csv"]) == 0
    assert "SM-90,SM,Stream Meadow,ANNUAL" in capsys.readouterr().out
    before = table_counts(programme_db)
    # outside its site, an unknown panel, a code already used: one line each, nothing written
    assert main(["station", "add", "SM-91", "--site", "SM", "--x", "0", "--y", "5742010", "--db", programme_db]) == 1
    assert "outside the boundary" in capsys.readouterr().err
    assert main(["station", "add", "SM-91", "--site", "SM", "--x", "512210", "--y", "5742010", "--panel", "NOPE",
                 "--db", programme_db]) == 1
    assert "panel" in capsys.readouterr().err
    assert main(["station", "add", "SM-90", "--site", "SM", "--x", "512210", "--y", "5742010",
                 "--db", programme_db]) == 1
    assert table_counts(programme_db) == before


# --- every hint is a command that works ------------------------------------------------------------------
_HINT = re.compile(r"`(monitor [^`]+)`")
_PLACEHOLDERS = {"YEAR": "2024", "SITE": "SM", "LOGIN": "someone", "reader": "reader --password secret-long-enough", "{year}": "2024", "FOLDER": "@folder", "FILE": "@file", "DIR": "@folder",
                 '"..."': "checked", "{db_path}": "@db"}


def _hints() -> list[str]:
    found = set()
    for path in (REPO_ROOT / "monitor").rglob("*.py"):
        text = path.read_text(encoding="utf-8")
        for m in _HINT.finditer(text):
            line = text[text.rfind("\n", 0, m.start()) + 1:m.start()]
            if "``" in text[max(0, m.start() - 1):m.end() + 1] or "#" in line:
                continue  # a docstring's literal or a comment, not a hint
            found.add(m[1])
    return sorted(found)


HINTS = _hints()


def test_the_hints_were_found():
    assert "monitor init --db {db_path}" in HINTS and any(h.startswith("monitor records unlock") for h in HINTS)


def _rest(ctx: click.Context) -> list[str]:
    # click 8.2 keeps the subcommand's name apart from its arguments (protected_args is deprecated)
    return list(getattr(ctx, "_protected_args", [])) + list(ctx.args)


@pytest.mark.parametrize("hint", HINTS)
def test_every_hint_parses_as_a_command(hint, tmp_path):
    """Each hint, with its placeholders filled in, names a command and options that exist and parse."""
    (tmp_path / "f.csv").write_text("a\n1\n")
    text = hint
    for key, value in _PLACEHOLDERS.items():
        text = text.replace(key, value)
    args = [a.replace("@folder", str(tmp_path)).replace("@file", str(tmp_path / "f.csv"))
            .replace("@db", str(tmp_path / "x.sqlite")) for a in shlex.split(text)[1:]]
    ctx = cli.make_context("monitor", list(args))
    command: click.Command = cli
    rest = _rest(ctx)
    while isinstance(command, click.Group) and rest:
        name, command, rest = command.resolve_command(ctx, rest)
        ctx = command.make_context(name, rest, parent=ctx)  # raises click.UsageError on an unknown option
        rest = _rest(ctx) if isinstance(command, click.Group) else []
    assert not isinstance(command, click.Group) or command.invoke_without_command, f"{hint} names a group only"


def test_the_missing_database_hint_works_when_run(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["--db", "fresh.sqlite", "summary"]) == 1
    hint = _HINT.search(capsys.readouterr().err)[1]
    assert main(shlex.split(hint)[1:]) == 0
    assert main(["--db", "fresh.sqlite", "summary"]) == 1
    hint = _HINT.search(capsys.readouterr().err)[1]  # now: set a programme up from a folder
    assert hint.startswith("monitor setup all")
    assert main(["setup", "blank", "mine"]) == 0
    assert main(["--db", "fresh.sqlite", *shlex.split(hint.replace("FOLDER", "mine"))[1:]]) == 0
    assert main(["--db", "fresh.sqlite", "summary"]) == 0
    assert Path("fresh.sqlite").is_file()


def test_shell_completion_as_the_readme_says(tmp_path):
    """README: `eval "$(_MONITOR_COMPLETE=bash_source monitor)"`; click then completes on Tab."""
    import os
    import subprocess
    import sys

    readme = (REPO_ROOT / "README.md").read_text()
    assert '_MONITOR_COMPLETE=bash_source monitor' in readme
    env = {**os.environ, "_MONITOR_COMPLETE": "bash_complete", "COMP_WORDS": "monitor stat", "COMP_CWORD": "1"}
    out = subprocess.run([sys.executable, "-c", "import sys; from monitor.cli.main import cli; "
                          "cli(prog_name='monitor')"], env=env, capture_output=True, text=True, cwd=tmp_path)
    assert "plain,station" in out.stdout.splitlines()
    env["_MONITOR_COMPLETE"] = "bash_source"
    out = subprocess.run([sys.executable, "-c", "from monitor.cli.main import cli; cli(prog_name='monitor')"],
                         env=env, capture_output=True, text=True, cwd=tmp_path)
    assert "complete -o nosort -F _monitor_completion monitor" in out.stdout
