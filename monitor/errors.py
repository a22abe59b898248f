"""The project's error and warning classes.

Domain errors are raised deep down and mapped to exit codes and one-line
messages in one place (``monitor.cli.output``).  Estimation trouble is a
warning recorded on a result, never a print.
"""

from __future__ import annotations

from dataclasses import dataclass


class MonitorError(Exception):
    """Base class: a problem the user can fix.  The CLI prints it on one line, exit 1."""

    exit_code = 1


@dataclass(frozen=True)
class InputProblem:
    """One problem found in a file a user handed in."""

    file: str
    row: int | None          # 1-based data row as the user sees it (header is row 1 in a sheet), or None
    field: str | None        # column name as written in the file, or None
    value: object            # the offending value as read, or None
    expected: str            # what was expected, in plain words
    severity: str = "error"  # "error" or "warning"

    def line(self) -> str:
        where = [self.file]
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.field is not None:
            where.append(f"field '{self.field}'")
        shown = "" if self.value is None else f": got {self.value!r}"
        label = "" if self.severity == "error" else "warning: "
        return f"{', '.join(where)}{shown}; {label}expected {self.expected}"


class InputError(MonitorError):
    """A file (or option value) is wrong.  Carries every problem found, not just the first."""

    def __init__(self, problems: list[InputProblem] | InputProblem | str):
        if isinstance(problems, str):
            problems = [InputProblem(file="<input>", row=None, field=None, value=None, expected=problems)]
        elif isinstance(problems, InputProblem):
            problems = [problems]
        self.problems = list(problems)
        first = self.problems[0].line() if self.problems else "invalid input"
        more = len(self.problems) - 1
        super().__init__(first if more <= 0 else f"{first} (and {more} more problem{'s' if more > 1 else ''})")


class DataError(MonitorError):
    """The stored data cannot answer the question (e.g. no visits in that season)."""


class DesignError(MonitorError):
    """A design or schedule request cannot be met (invalid polygon, zero teams, ...)."""


class EstimationError(MonitorError):
    """A statistic cannot be computed from these data (fewer than 2 quadrats, no variation, ...)."""


class SchemaError(MonitorError):
    """The database is missing, behind the code's schema, or not a monitor database."""


class AccessError(MonitorError):
    """The database role in use may not do this (a reader writing, a recorder changing the schema)."""


class LockedError(MonitorError):
    """The season is certified (locked); unlock it with a reason first."""


class FitWarning(UserWarning):
    """Estimation trouble recorded on a fit result: no convergence, a variance on its bound, few data."""


@dataclass(frozen=True)
class Diagnostic:
    """A problem with a fit or an estimate, stored on the result and shown in reports."""

    code: str        # short machine name, e.g. "not_converged", "variance_at_bound", "few_stations"
    message: str     # one plain sentence for a reader
    severity: str = "warning"  # "warning" or "info"
