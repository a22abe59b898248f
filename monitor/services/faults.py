"""Fault-injection points: named moments inside an open write transaction.

The record services call :func:`reached` when an import has written its visits (``"N visits written"``),
when an import has applied its corrections and written no new visit (``"N visits corrected"``), and when
``records set`` has written its value and change-log row (``"1 value corrected"``).  In production the
list of hooks is empty and nothing happens.  Tests append a callable (a fixture in the same process, or a
launcher script for a process they kill: ``tests/resilience/paused_monitor.py``) to stop the command at that
moment and show that nothing of it is left in the database.
"""

from __future__ import annotations

from collections.abc import Callable

#: callables run with the moment's description; empty in production
HOOKS: list[Callable[[str], None]] = []


def reached(moment: str) -> None:
    """Run every installed hook at this moment (none in production)."""
    for hook in HOOKS:
        hook(moment)
