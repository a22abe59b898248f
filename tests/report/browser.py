"""Drive Debian's headless chromium from tests (command-line switches only, no extra packages)."""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile
from pathlib import Path

INSTALL_HINT = "chromium not found: install the Debian package `chromium` (apt-get install -y chromium)"
FLAGS = (
    "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--hide-scrollbars", "--enable-logging=stderr", "--v=0",
)


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


def run(page: Path, *extra: str, timeout: float = 90) -> subprocess.CompletedProcess:
    """Run chromium once on a local page with a fresh profile; stdout/stderr captured as text."""
    with tempfile.TemporaryDirectory(prefix="chromium-profile-") as profile:
        return subprocess.run(
            [chromium_path(), *FLAGS, f"--user-data-dir={profile}", *extra, page.resolve().as_uri()],
            capture_output=True, text=True, timeout=timeout, check=False,
        )


def console_lines(stderr: str) -> list[str]:
    """Console messages (errors, CSP violations) that chromium logs as INFO:CONSOLE on stderr."""
    return [line for line in stderr.splitlines() if ":CONSOLE" in line]


def pdf_page_count(pdf: bytes) -> int:
    """Pages in a PDF: objects of /Type /Page (not /Pages) (ISO 32000-1:2008, 7.7.3.3, page objects)."""
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))
