"""One crew's office session, run as its own process: ``python -m tests.resilience.crew JOB.json``.

The job file names the database, a barrier (a ``ready`` file this process writes once its modules are
loaded, and a ``go`` file it waits for) and a list of commands, each ``{"user": ..., "argv": [...]}``.
Every command goes through ``monitor.cli.main.main``: the same parsing, service call and error mapping as
``monitor ...`` on a shell, without paying the interpreter's start-up once per command.  The exit code of
each command is printed as JSON on stdout; the commands' own messages go to stderr as usual.

No tests live here; tests/resilience/test_many_hands.py starts these processes.
"""

from __future__ import annotations

import json
import os
import sys
import time
import traceback
from pathlib import Path


def main(job_path: str) -> int:
    job = json.loads(Path(job_path).read_text())
    # modules loaded and the schema check's libraries warmed before the barrier, so that what is raced is
    # the commands' database work, not the interpreter's start-up
    from monitor.cli.main import main as monitor_main
    from monitor.db import Store
    from monitor.services import imports  # noqa: F401

    Store.open(job["db"]).dispose()
    Path(job["ready"]).write_text(str(os.getpid()))
    deadline = time.monotonic() + 120
    while not Path(job["go"]).exists():
        if time.monotonic() > deadline:
            print("crew: no go signal within 120 s", file=sys.stderr)
            return 3
        time.sleep(0.005)
    results = []
    for command in job["commands"]:
        os.environ["MONITOR_USER"] = command["user"]
        argv = ["--db", job["db"], *command["argv"]]
        started, wall = time.monotonic(), time.time()
        try:
            code = monitor_main(argv)
        except BaseException:  # anything the CLI did not map is a failure the test must see
            traceback.print_exc()
            code = -1
        results.append({"argv": command["argv"], "code": code, "seconds": round(time.monotonic() - started, 3),
                        "start": wall, "end": time.time()})
    print(json.dumps(results))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
