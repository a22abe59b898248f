"""Import rules (DEVELOPERS.md): stages are pure; only monitor.db knows the database; only monitor.cli knows click."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

from tests.conftest import REPO_ROOT

PURE = ["monitor.trend", "monitor.estimate", "monitor.design", "monitor.schedule", "monitor.power",
        "monitor.report", "monitor.io", "monitor.quality"]
DATABASE_LIBRARIES = ("sqlalchemy", "sqlmodel", "alembic")


@pytest.mark.parametrize("module", PURE)
def test_pure_packages_load_neither_database_nor_click(module):
    if not (REPO_ROOT / module.replace(".", "/")).is_dir():
        pytest.skip(f"{module} not present")
    code = (
        f"import sys, importlib, pkgutil; m = importlib.import_module('{module}');"
        "[importlib.import_module(i.name) for i in pkgutil.walk_packages(m.__path__, m.__name__ + '.')];"
        "bad = sorted(k for k in sys.modules if k.split('.')[0] in ('sqlalchemy', 'sqlmodel', 'alembic', 'click'));"
        "print(','.join(bad))"
    )
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO_ROOT, check=True)
    assert result.stdout.strip() == "", f"{module} pulls in {result.stdout.strip()}"


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text())
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(a.name.split(".")[0] for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module.split(".")[0])
    return names


def test_only_the_db_package_imports_database_libraries():
    offenders = []
    for path in (REPO_ROOT / "monitor").rglob("*.py"):
        rel = path.relative_to(REPO_ROOT / "monitor")
        if rel.parts[0] in ("db",):
            continue
        used = _imports(path) & set(DATABASE_LIBRARIES)
        if used:
            offenders.append(f"{rel}: {sorted(used)}")
    assert offenders == []


def test_only_the_cli_imports_click():
    offenders = [str(p.relative_to(REPO_ROOT)) for p in (REPO_ROOT / "monitor").rglob("*.py")
                 if p.relative_to(REPO_ROOT / "monitor").parts[0] != "cli" and "click" in _imports(p)]
    assert offenders == []


WEB_LIBRARIES = {"starlette", "uvicorn", "multipart", "python_multipart", "fastapi", "httpx", "httpx2"}


def test_only_the_web_package_imports_the_web_framework():
    """monitor/web sits beside monitor/cli (web -> services); nothing else knows the framework or the server."""
    offenders = [f"{p.relative_to(REPO_ROOT)}: {sorted(_imports(p) & WEB_LIBRARIES)}"
                 for p in (REPO_ROOT / "monitor").rglob("*.py")
                 if p.relative_to(REPO_ROOT / "monitor").parts[0] != "web" and _imports(p) & WEB_LIBRARIES]
    assert offenders == []
    assert "starlette" in _imports(REPO_ROOT / "monitor" / "web" / "app.py")  # the rule has something to hold


def test_the_web_package_calls_services_not_the_database():
    """The pages go through the services like the command line: no database library, no monitor.db."""
    offenders = []
    for path in (REPO_ROOT / "monitor" / "web").rglob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("monitor.db"):
                offenders.append(f"{path.relative_to(REPO_ROOT)}: {node.module}")
            if isinstance(node, ast.Import) and any(a.name.startswith("monitor.db") for a in node.names):
                offenders.append(str(path.relative_to(REPO_ROOT)))
    assert offenders == []


def test_pure_packages_do_not_load_the_web_framework():
    code = ("import sys, importlib; [importlib.import_module(m) for m in " + repr(PURE + ["monitor.services"]) + "];"
            "print(','.join(sorted(k for k in sys.modules if k.split('.')[0] in ('starlette', 'uvicorn'))))")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=REPO_ROOT, check=True)
    assert result.stdout.strip() == ""
