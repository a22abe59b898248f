"""The command line: help on every command, every command in the README, one-line errors, nothing written."""

from __future__ import annotations

import shutil
import subprocess
import sys

import click
import pytest

from monitor.cli.main import cli, main
from tests.conftest import REPO_ROOT


def _commands(group: click.Group, prefix: tuple[str, ...] = ()) -> list[tuple[str, ...]]:
    out = []
    for name, command in sorted(group.commands.items()):
        path = prefix + (name,)
        out.append(path)
        if isinstance(command, click.Group):
            out.extend(_commands(command, path))
    return out


ALL_COMMANDS = _commands(cli)


def test_there_are_commands():
    assert ("init",) in ALL_COMMANDS and ("demo",) in ALL_COMMANDS and ("setup", "stations") in ALL_COMMANDS


@pytest.mark.parametrize("path", ALL_COMMANDS, ids=[" ".join(p) for p in ALL_COMMANDS])
def test_every_command_has_help(path, capsys):
    assert main([*path, "--help"]) == 0
    out = capsys.readouterr().out
    assert "Usage:" in out
    command = cli
    for name in path:
        command = command.commands[name]
    assert command.help and len(command.help.strip()) > 15


@pytest.mark.parametrize("path", ALL_COMMANDS, ids=[" ".join(p) for p in ALL_COMMANDS])
def test_every_command_is_in_the_readme(path):
    readme = (REPO_ROOT / "README.md").read_text()
    if isinstance(_lookup(path), click.Group):
        assert f"monitor {' '.join(path)} " in readme
    else:
        # a command of a group may be listed inside a "(and `x`, `y`)" list after its group
        assert f"monitor {' '.join(path)}" in readme or f"`{path[-1]}`" in readme


def _lookup(path):
    command = cli
    for name in path:
        command = command.commands[name]
    return command


def test_bad_file_gives_exit_1_one_line_and_unchanged_database(tmp_path, demo_source, capsys):
    db = str(tmp_path / "p.sqlite")
    assert main(["--db", db, "init"]) == 0
    folder = tmp_path / "files"
    shutil.copytree(demo_source, folder)
    stations = folder / "stations.csv"
    stations.write_text(stations.read_text().replace(",1.0,1.0,random,", ",1.0,-1,random,", 1))
    before = (tmp_path / "p.sqlite").read_bytes()
    capsys.readouterr()
    assert main(["--db", db, "setup", "all", str(folder)]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert "stations.csv" in err[0] and "row " in err[0] and "quadrat_length_m" in err[0]
    assert (tmp_path / "p.sqlite").read_bytes() == before


def test_command_on_missing_database_gives_a_hint(tmp_path, capsys):
    assert main(["--db", str(tmp_path / "none.sqlite"), "summary"]) == 1
    err = capsys.readouterr().err
    assert "monitor init" in err and "Traceback" not in err


def test_file_that_is_not_a_monitor_database_is_refused(tmp_path, capsys):
    import sqlite3

    path = tmp_path / "other.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE birds (id INTEGER, name TEXT)")
    before = path.read_bytes()
    assert main(["--db", str(path), "init"]) == 1
    assert "not a monitor database" in capsys.readouterr().err
    assert main(["--db", str(path), "summary"]) == 1
    assert path.read_bytes() == before
    garbage = tmp_path / "garbage.sqlite"
    garbage.write_bytes(b"this is not a database file at all" * 100)
    assert main(["--db", str(garbage), "summary"]) == 1
    assert "not a database" in capsys.readouterr().err


def test_usage_error_exits_2():
    result = subprocess.run([sys.executable, "-m", "monitor", "no-such-command"], capture_output=True, text=True,
                            cwd=REPO_ROOT)
    assert result.returncode == 2
