"""The design and schedule stages stay pure: no database layer, no command-line library."""

import subprocess
import sys


def test_stages_do_not_import_database_or_cli_libraries():
    code = ("import sys, monitor.design, monitor.schedule, monitor.io.spatial; "
            "bad = [m for m in ('sqlalchemy', 'sqlmodel', 'alembic', 'click') if m in sys.modules]; "
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
