"""monitor: plan, record and analyse permanent-quadrat monitoring of plant populations.

Stage packages (pure computation, no database, no click):
``monitor.design``, ``monitor.schedule``, ``monitor.estimate``, ``monitor.trend``,
``monitor.power``, ``monitor.report``.
Files without a database: ``monitor.io``.  The store: ``monitor.db``.
Orchestration: ``monitor.services``.  Command line: ``monitor.cli``.
"""

__version__ = "0.1.0"
