"""`monitor serve` as a user starts it: a process that prints a one-time link on loopback which opens the
workspace once."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import httpx2 as httpx

from tests.conftest import REPO_ROOT
from tests.web.conftest import _build
from tests.web.live import free_port


def test_serve_prints_a_one_time_link_that_opens_the_workspace(tmp_path):
    db = str(tmp_path / "programme.sqlite")
    _build(db)
    port = free_port()
    process = subprocess.Popen([sys.executable, "-c", "import sys; from monitor.cli.main import main; sys.exit(main())", "--db", db, "serve", "--port", str(port)],
                               cwd=REPO_ROOT, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                               env={**os.environ, "PYTHONUNBUFFERED": "1"})
    try:
        link = None
        deadline = time.monotonic() + 60
        while link is None and time.monotonic() < deadline:
            line = process.stdout.readline()
            if line.startswith("open: "):
                link = line.split("open: ", 1)[1].strip()
        assert link and link.startswith(f"http://127.0.0.1:{port}/open?token=")
        assert (tmp_path / "monitor_web").is_dir()  # its files beside the database
        for _ in range(100):
            try:
                with httpx.Client(follow_redirects=True) as client:
                    page = client.get(link)
                    break
            except httpx.ConnectError:
                time.sleep(0.1)
        assert page.status_code == 200 and "Hollowmere Vale Reserve plant monitoring" in page.text
        with httpx.Client() as other:
            assert other.get(link).status_code == 401  # the link worked once
    finally:
        process.send_signal(signal.SIGINT)
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
        process.stdout.close()
