"""docs/tutorial.md works as written: its files are written and its commands run, in order, in a fresh
folder, each succeeding (exit code 0)."""

from __future__ import annotations

import re
import shlex

from monitor.cli.main import main
from tests.conftest import REPO_ROOT

TUTORIAL = REPO_ROOT / "docs" / "tutorial.md"
_BLOCK = re.compile(r"```(\w+)( file=(\S+))?\n(.*?)```", re.S)


def _steps() -> list[tuple[str, str]]:
    steps = []
    for kind, _, name, body in _BLOCK.findall(TUTORIAL.read_text(encoding="utf-8")):
        if kind == "console":
            steps += [("run", line[2:]) for line in body.splitlines() if line.startswith("$ ")]
        elif name:
            steps.append((f"write {name}", body))
    return steps


def test_tutorial_has_commands_and_files():
    steps = _steps()
    assert sum(kind == "run" for kind, _ in steps) >= 12
    assert any(kind.startswith("write ") for kind, _ in steps)
    assert all(text.startswith("monitor ") for kind, text in steps if kind == "run")


def test_tutorial_runs(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    for kind, text in _steps():
        if kind.startswith("write "):
            (tmp_path / kind.removeprefix("write ")).write_text(text, encoding="utf-8")
            continue
        args = shlex.split(text)[1:]
        code = main(args)
        err = capsys.readouterr().err
        assert code == 0, f"`{text}` failed: {err}"
    assert (tmp_path / "packs").is_dir() and list(tmp_path.glob("packs/*/field_sheet.pdf"))
    assert main(["--db", "reserve.sqlite", "estimate", "2024", "--csv"]) == 0
    out = capsys.readouterr().out
    assert "MARVIO" in out and "SM" in out
