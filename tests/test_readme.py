"""README promises: two set-up commands, and CI runs exactly the README's test command."""

from __future__ import annotations

import re

from tests.conftest import REPO_ROOT


def _commands() -> list[str]:
    readme = (REPO_ROOT / "README.md").read_text()
    section = readme.split("## Set up on a fresh machine", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```\n(.+?)\n```", section, flags=re.S)


def test_readme_has_exactly_two_setup_commands():
    commands = _commands()
    assert len(commands) == 2
    assert "monitor demo" in commands[0]
    assert "pytest" in commands[1]


def test_ci_runs_exactly_the_readme_test_command():
    ci_lines = (REPO_ROOT / ".ci" / "run").read_text().splitlines()
    assert _commands()[1] in ci_lines


def test_readme_carries_the_fieldwork_caution():
    readme = (REPO_ROOT / "README.md").read_text().lower()
    for word in ("lone", "water", "tick", "weather", "fragile", "permission", "risk assessment"):
        assert word in readme
