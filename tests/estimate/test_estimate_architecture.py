"""monitor.estimate is a pure stage: no database, no command-line libraries."""

import subprocess
import sys


def test_importing_estimate_loads_no_database_or_cli_library():
    code = (
        "import sys, monitor.estimate; "
        "bad = [m for m in ('sqlalchemy', 'sqlmodel', 'alembic', 'click') if m in sys.modules]; "
        "print(','.join(bad))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_estimate_uses_no_global_random_state():
    import inspect

    import monitor.estimate as estimate

    for module in {inspect.getmodule(obj) for obj in vars(estimate).values() if inspect.getmodule(obj)}:
        if module.__name__.startswith("monitor.estimate"):
            source = inspect.getsource(module)
            assert "np.random." not in source and "import random" not in source, module.__name__
