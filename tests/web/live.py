"""A workspace served by uvicorn in a thread, and Debian's chromium driven by Playwright (never a downloaded
browser), for the browser tests and the screenshots."""

from __future__ import annotations

import contextlib
import os
import shutil
import socket
import threading
import time
from collections.abc import Iterator
from pathlib import Path

CHROMIUM_CANDIDATES = ("/usr/bin/chromium", "/usr/bin/chromium-browser")
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
                 "--disable-component-update", "--disable-default-apps", "--disable-extensions", "--disable-sync",
                 "--no-first-run", "--metrics-recording-only", "--disable-breakpad"]


def chromium_path() -> str | None:
    given = os.environ.get("MONITOR_TEST_CHROMIUM")
    for path in ((given,) if given else ()) + CHROMIUM_CANDIDATES:
        if path and Path(path).is_file():
            return path
    return shutil.which("chromium")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def served(app) -> Iterator[str]:
    """Serve a Starlette app on a free loopback port; yields its base URL."""
    import uvicorn

    port = free_port()
    server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning", lifespan="off"))
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not server.started:
        if time.monotonic() > deadline:
            raise RuntimeError("the workspace did not start")
        time.sleep(0.05)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(timeout=10)


@contextlib.contextmanager
def browser() -> Iterator[object]:
    from playwright.sync_api import sync_playwright

    path = chromium_path()
    if path is None:
        raise RuntimeError("no chromium installed")
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=path, args=CHROMIUM_ARGS, headless=True)
        try:
            yield b
        finally:
            b.close()
