"""The ``monitor`` command with a pause at the record services' fault-injection points.

``python -m tests.resilience.paused_monitor SECONDS ARGS...`` runs ``monitor ARGS...`` through
``monitor.cli.main.main`` with one hook installed in ``monitor.services.faults.HOOKS``: wherever a command
reaches a fault-injection point (an import has written its visits, or applied its corrections; ``records
set`` has written its value and change-log row), it prints a line starting with :data:`PAUSED` on stderr
and sleeps SECONDS with its transaction still open, so that a test can kill the process at that moment.
Production code carries no pause: the list of hooks is empty there.

No tests live here; tests/resilience/test_faults.py and tests/services/test_records_robustness.py start it.
"""

from __future__ import annotations

import subprocess
import sys
import time

#: the start of the line printed at each pause
PAUSED = "paused at a fault-injection point"


def command(seconds: float) -> list[str]:
    """The command line that runs ``monitor`` pausing ``seconds`` at each fault-injection point (append ARGS)."""
    return [sys.executable, "-m", "tests.resilience.paused_monitor", str(seconds)]


def wait_for_pause(process: subprocess.Popen, timeout: float = 120.0) -> str:
    """Read the process's stderr until its pause line (its transaction open); return that line."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        line = process.stderr.readline()
        if line.startswith(PAUSED):
            return line
        if not line and process.poll() is not None:
            raise AssertionError(f"the command ended before the pause: {process.returncode} {process.stderr.read()}")
    raise AssertionError("the command never reached a fault-injection point")


def main(argv: list[str]) -> int:
    seconds = float(argv[0])
    from monitor.cli.main import main as monitor_main
    from monitor.services import faults

    def pause(moment: str) -> None:
        print(f"{PAUSED}: {moment}, transaction open; pausing {seconds} s", file=sys.stderr, flush=True)
        time.sleep(seconds)

    faults.HOOKS.append(pause)
    return monitor_main(argv[1:])


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
