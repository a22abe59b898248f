"""Faults: a killed correction or report, a read-only database, a full disk.

* SIGKILL (signal 9, which cannot be caught) while ``monitor records set`` or ``monitor records import
  --correct`` holds its corrected values and change-log rows in an open transaction (run through
  tests/resilience/paused_monitor.py, which installs a pause at the services' fault-injection points) leaves every row of every table as before, on
  SQLite (the file's bytes too, once the hot journal is rolled back: https://www.sqlite.org/atomiccommit.html)
  and on PostgreSQL (an uncommitted transaction of a lost connection is rolled back).
* SIGKILL while ``monitor report`` writes its figures leaves the report folder already in place exactly as
  it was: the report is written into a hidden temporary sibling and renamed into place at the end.
* A database file the process may not write gives exit 1 and one line, not a traceback, and changes nothing.
* A full disk gives exit 1 and one line and changes nothing: simulated for SQLite with ``PRAGMA
  max_page_count`` (the test hook MONITOR_TEST_SQLITE_MAX_PAGES; SQLite then fails the write that needs a
  new page with SQLITE_FULL, the same error as a full disk: https://www.sqlite.org/pragma.html), and, where
  unprivileged user namespaces allow it, on a real, small, full tmpfs file system (database and report).

A file that is not a monitor database is refused by tests/cli/test_cli.py.  Everything here runs on the
invented demo programme.
"""

from __future__ import annotations

import ctypes
import hashlib
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from monitor.db.engine import MAX_PAGES_HOOK
from monitor.services.imports import import_records
from tests.conftest import REPO_ROOT
from tests.resilience.paused_monitor import command, wait_for_pause
from tests.resilience.tables import season_rows, write_rows
from tests.services import test_records_data as shared
from tests.services.test_records_data import DEMO, Template, build_demo, dump

demo_template = shared.demo_template  # fixture: the demo with seasons 2015-2023, once per engine


def _env(**extra: str) -> dict[str, str]:
    env = {**os.environ, "PYTHONPATH": str(REPO_ROOT)}
    env.pop(MAX_PAGES_HOOK, None)
    env.update(extra)
    return env


def _monitor(db: str, *args: str, env: dict | None = None, pause: float | None = None, **popen) -> subprocess.Popen:
    """``monitor ARGS``; with ``pause``, stopping that long at each fault-injection point (transaction open)."""
    program = [sys.executable, "-m", "monitor"] if pause is None else command(pause)
    return subprocess.Popen([*program, "--db", db, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env or _env(), cwd=REPO_ROOT, **popen)


def _kill(process: subprocess.Popen) -> None:
    process.send_signal(signal.SIGKILL)
    process.wait(timeout=30)
    process.stdout.close()
    process.stderr.close()
    assert process.returncode == -signal.SIGKILL


def _done_row(year: int, column: str) -> dict:
    _header, rows = season_rows(year)
    return next(r for r in rows if r["status"] == "done" and (r[column] or "").strip())


def _recount_sheet(folder: Path, year: int) -> tuple[Path, int]:
    """The stored season's sheet with every recorded violet count one higher; returns it and the visits changed."""
    header, rows = season_rows(year)
    changed = 0
    for r in rows:
        if r["status"] == "done" and (r["MARVIO:count"] or "").strip():
            r["MARVIO:count"] = str(int(r["MARVIO:count"]) + 1)
            changed += 1
    return write_rows(folder / f"recount_{year}.csv", header, rows), changed


def _one_line_error(stderr: str) -> str:
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), stderr
    assert "Traceback" not in stderr
    return lines[0]


# --- SIGKILL during a correction ------------------------------------------------------------------------------

@pytest.mark.parametrize("command", ["set", "import --correct"])
def test_a_correction_killed_mid_way_leaves_the_database_as_before(demo_template, tmp_path, command):
    db = demo_template.copy()
    if command == "set":
        row = _done_row(2018, "MARVIO:count")
        args = ["records", "set", row["station"], "2018", "MARVIO", "count", str(int(row["MARVIO:count"]) + 5),
                "--reason", "recounted from the photo"]
        expected = "1 value corrected"
    else:
        sheet, changed = _recount_sheet(tmp_path, 2022)
        args = ["records", "import", "--correct", "--reason", "violets recounted", str(sheet)]
        expected = f"{changed} visits corrected"
    before = dump(db)
    before_bytes = Path(db).read_bytes() if demo_template.engine == "sqlite" else None
    process = _monitor(db, *args, pause=60)
    try:
        assert expected in wait_for_pause(process)
        _kill(process)
    finally:
        if process.poll() is None:
            process.kill()
    if demo_template.engine == "sqlite":
        assert os.path.exists(db + "-journal")  # the killed writer's hot journal
    assert dump(db) == before  # reading rolls the hot journal back first
    if before_bytes is not None:
        assert Path(db).read_bytes() == before_bytes
    # and the same correction goes through afterwards, logged
    from monitor.cli.main import main

    assert main(["--db", db, *args]) == 0
    assert len(dump(db)["change_log"]) == len(before["change_log"]) + (1 if command == "set" else changed)


# --- SIGKILL during a report ------------------------------------------------------------------------------------

def _tree(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_a_report_killed_while_writing_leaves_the_previous_report_in_place(demo_db, tmp_path):
    reports = tmp_path / "reports"
    previous = reports / "2026"
    (previous / "figures").mkdir(parents=True)
    (previous / "index.html").write_text("<!doctype html><title>the report as it stood</title>\n")
    (previous / "report.json").write_text('{"year": 2026}\n')
    (previous / "figures" / "trend.png").write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    before = _tree(previous)

    process = _monitor(demo_db, "report", "2026", "--out", str(previous))
    try:
        deadline = time.monotonic() + 120
        while not any(reports.glob(".2026.*.partial/figures/*.png")):  # half-way through the figures
            assert process.poll() is None, process.communicate()
            assert time.monotonic() < deadline, "the report never started writing figures"
            time.sleep(0.02)
        _kill(process)
    finally:
        if process.poll() is None:
            process.kill()
    assert _tree(previous) == before
    visible = sorted(p.name for p in reports.iterdir() if not p.name.startswith("."))
    assert visible == ["2026"]
    # what the killed run left is its hidden temporary folder, never a half-written report in place
    assert all(p.name.startswith(".2026.") and p.name.endswith(".partial") for p in reports.iterdir()
               if p.name.startswith("."))


# --- read-only database and full disk (SQLite) ------------------------------------------------------------------

@pytest.fixture(scope="module")
def sqlite_demo(tmp_path_factory):
    """The demo with seasons 2015-2023 in SQLite; season 2024's sheet still to import."""
    template = Template("sqlite", tmp_path_factory.mktemp("faults"), build_demo)
    yield template
    template.close()


#: capabilities that let root ignore file modes (linux/capability.h): CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH,
#: CAP_FOWNER; PR_CAPBSET_DROP is 24 (linux/prctl.h)
_FILE_MODE_CAPABILITIES = (1, 2, 3)
_PR_CAPBSET_DROP = 24


def _obey_file_modes() -> None:
    """In the child before exec: drop from the bounding set the capabilities with which root ignores file
    modes, so that the command (still the same user and interpreter) meets a read-only file as anyone would."""
    libc = ctypes.CDLL(None, use_errno=True)
    for capability in _FILE_MODE_CAPABILITIES:
        if libc.prctl(_PR_CAPBSET_DROP, capability, 0, 0, 0) != 0:
            raise OSError(ctypes.get_errno(), "prctl(PR_CAPBSET_DROP)")


def _unprivileged() -> dict:
    """Popen arguments under which file modes apply; skip when they cannot be made to."""
    if os.geteuid() != 0:
        return {}
    probe = Path(tempfile.mkdtemp()) / "probe"
    probe.write_text("")
    probe.chmod(0o444)
    try:
        result = subprocess.run([sys.executable, "-c", f"open({str(probe)!r}, 'a')"], preexec_fn=_obey_file_modes,
                                capture_output=True)
    except (OSError, subprocess.SubprocessError) as exc:
        pytest.skip(f"running as root and cannot drop the capability to ignore file modes ({exc})")
    finally:
        shutil.rmtree(probe.parent)
    if result.returncode == 0:
        pytest.skip("running as root and file modes still do not apply after dropping CAP_DAC_OVERRIDE")
    return {"preexec_fn": _obey_file_modes}


@pytest.mark.parametrize("folder_writable", [True, False], ids=["file read-only", "file and folder read-only"])
def test_a_read_only_database_gives_one_line_and_changes_nothing(sqlite_demo, tmp_path, folder_writable):
    """A new season, a corrected sheet, one value and the quality checks (which store flags) are each refused
    (two of them for each case: the file alone read-only, and a read-only folder where no journal can go)."""
    popen = _unprivileged()
    folder = tmp_path / "ro"
    folder.mkdir()
    db = str(folder / "programme.sqlite")
    shutil.copy(sqlite_demo.copy(), db)
    sheet, _changed = _recount_sheet(tmp_path, 2022)
    row = _done_row(2018, "MARVIO:count")
    before = Path(db).read_bytes()
    os.chmod(db, 0o444)
    if not folder_writable:
        os.chmod(folder, 0o555)
    try:
        commands = (["records", "import", str(DEMO / "records" / "season_2024.csv")],
                    ["records", "import", "--correct", "--reason", "recount", str(sheet)],
                    ["records", "set", row["station"], "2018", "MARVIO", "count", "99", "--reason", "typo"],
                    ["quality"])
        for args in (commands[0::2] if folder_writable else commands[1::2]):
            process = _monitor(db, *args, **popen)
            _out, err = process.communicate(timeout=120)
            assert process.returncode == 1, (args, err)
            assert "readonly database" in _one_line_error(err), err
    finally:
        os.chmod(folder, 0o755)
        os.chmod(db, 0o644)
    assert Path(db).read_bytes() == before
    assert not os.path.exists(db + "-journal")


def test_a_full_database_page_limit_gives_one_line_and_changes_nothing(sqlite_demo):
    db = sqlite_demo.copy()
    with sqlite3.connect(db) as connection:
        pages = connection.execute("PRAGMA page_count").fetchone()[0]
        assert connection.execute("PRAGMA freelist_count").fetchone()[0] == 0  # no free page to reuse
    connection.close()
    before = Path(db).read_bytes()
    process = _monitor(db, "records", "import", str(DEMO / "records" / "season_2024.csv"),
                       env=_env(**{MAX_PAGES_HOOK: str(pages)}))
    _out, err = process.communicate(timeout=120)
    assert process.returncode == 1, err
    assert _one_line_error(err) == "error: database error, nothing was written: database or disk is full"
    assert Path(db).read_bytes() == before
    # with room again, the same sheet imports
    assert import_records(db, DEMO / "records" / "season_2024.csv").visits_added > 0


def _user_namespaces() -> bool:
    try:
        return subprocess.run(["unshare", "-rm", "true"], capture_output=True, timeout=30).returncode == 0
    except (OSError, subprocess.SubprocessError):
        return False


def test_a_full_file_system_gives_one_line_for_the_database_and_the_report(sqlite_demo, demo_db, tmp_path):
    if not _user_namespaces():
        pytest.skip("unprivileged user and mount namespaces are not available (`unshare -rm` fails), so no small "
                    "file system can be mounted to fill; the page-limit test covers SQLite's full-disk path")
    db = sqlite_demo.copy()
    size = os.path.getsize(db)
    mount = tmp_path / "small"
    mount.mkdir()
    python, env = sys.executable, _env()
    season = DEMO / "records" / "season_2024.csv"
    # a tmpfs holding the database with 8 KiB to spare, plus a previous report folder; then an import and a
    # report that need more than that.  The mount exists only inside the namespace, so the script copies the
    # database back out and lists what the report folder holds.
    script = f"""
set -u
mount -t tmpfs -o size={size + 8192} tmpfs {mount}
cp {db} {mount}/programme.sqlite
mkdir -p {mount}/reports/2026 && echo previous > {mount}/reports/2026/index.html
{python} -m monitor --db {mount}/programme.sqlite records import {season} 2> {tmp_path}/import.err
echo $? > {tmp_path}/import.rc
{python} -m monitor --db {demo_db} report 2026 --out {mount}/reports/2026 2> {tmp_path}/report.err
echo $? > {tmp_path}/report.rc
cp {mount}/programme.sqlite {tmp_path}/after.sqlite
ls -A {mount}/reports > {tmp_path}/reports.txt
cat {mount}/reports/2026/index.html > {tmp_path}/previous.txt
"""
    result = subprocess.run(["unshare", "-rm", "sh", "-c", script], env=env, cwd=REPO_ROOT, capture_output=True,
                            text=True, timeout=300)
    assert result.returncode == 0, result.stderr
    assert (tmp_path / "import.rc").read_text().strip() == "1"
    assert _one_line_error((tmp_path / "import.err").read_text()) == (
        "error: database error, nothing was written: database or disk is full")
    assert (tmp_path / "after.sqlite").read_bytes() == Path(db).read_bytes()
    assert (tmp_path / "report.rc").read_text().strip() == "1"
    assert _one_line_error((tmp_path / "report.err").read_text()) == (
        f"error: No space left on device: {mount}/reports/2026")
    assert (tmp_path / "reports.txt").read_text().split() == ["2026"]  # no temporary folder left behind
    assert (tmp_path / "previous.txt").read_text() == "previous\n"
