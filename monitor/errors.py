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

    @property
    def kind(self) -> str:
        return problem_kind(self)

    def line(self) -> str:
        where = [self.file]
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.field is not None:
            where.append(f"field '{self.field}'")
        shown = "" if self.value is None else f": got {self.value!r}"
        label = "" if self.severity == "error" else "warning: "
        return f"{', '.join(where)}{shown}; {label}expected {self.expected}"


#: at most this many problems of one file are kept and listed; the rest are counted by kind, so that a
#: million-row file of garbage costs neither gigabytes of memory nor millions of lines (common practice)
MAX_LISTED = 100


def problem_kind(problem: InputProblem) -> str:
    """What a problem is about, without its row or value: its expected text up to any detail in brackets."""
    text = problem.expected
    for mark in (" (", "; ", " [", ": "):
        cut = text.find(mark)
        if cut > 0:
            text = text[:cut]
    return ("warning: " if problem.severity != "error" else "") + text


class ProblemCounter:
    """Keeps the first :data:`MAX_LISTED` problems in order of a key (row first) and counts all of them by kind.

    Memory stays bounded however many problems a file has: a heap of the smallest keys, and one counter
    per kind.
    """

    def __init__(self, limit: int = MAX_LISTED):
        self.limit = limit
        self._heap: list[tuple] = []          # (-key..., problem): a max-heap of the kept keys
        self._seq = 0
        self.counts: dict[str, int] = {}
        self.total = 0
        self.errors = 0
        self._kinds: dict[tuple[str, str], str] = {}
        self._worst: tuple = ()  # the largest key kept, once the heap is full (keyed use)

    def add(self, problem: InputProblem, key: tuple | None = None, *, count: bool = True) -> None:
        self.add_parts(problem.file, problem.row, problem.field, problem.value, problem.expected, problem.severity,
                       key=key, count=count, made=problem)

    def add_parts(self, file: str, row: int | None, field: str | None, value: object, expected: str,
                  severity: str = "error", *, key: tuple | None = None, count: bool = True,
                  made: InputProblem | None = None) -> None:
        """Count a problem and keep it if it is among the first; the InputProblem is built only when kept
        (a million problems cost counters, not a million objects)."""
        import heapq

        if count:
            self.total += 1
            if severity == "error":
                self.errors += 1
            kind = self._kinds.get((expected, severity))
            if kind is None:
                kind = self._kinds[(expected, severity)] = problem_kind(
                    made or InputProblem(file, row, field, value, expected, severity))
            self.counts[kind] = self.counts.get(kind, 0) + 1
        self._seq += 1
        full = self._heap
        if key is None:
            if len(full) >= self.limit:
                return  # in arrival order, a later problem never displaces a kept one
            negated = (-self._seq, -self._seq)
        else:
            if len(full) >= self.limit and key >= self._worst:
                return  # a later key than every kept one (ties: the earlier arrival stays)
            negated = (*(-k for k in key), -self._seq)
        problem = made or InputProblem(file, row, field, value, expected, severity)
        if len(full) < self.limit:
            heapq.heappush(full, (negated, problem))
        else:
            heapq.heapreplace(full, (negated, problem))
        if len(full) >= self.limit and key is not None:
            self._worst = tuple(-k for k in full[0][0][:-1])

    def merge(self, other: ProblemCounter) -> None:
        """Add another collector's problems after this one's (its kept ones, and its counts of all)."""
        for problem in other.kept():
            self.add(problem, count=False)
        for kind, n in other.counts.items():
            self.counts[kind] = self.counts.get(kind, 0) + n
        self.total += other.total
        self.errors += other.errors

    def merge_counts(self, other: ProblemCounter) -> None:
        """Add another collector's counts (its problems already added with ``count=False``)."""
        for kind, n in other.counts.items():
            self.counts[kind] = self.counts.get(kind, 0) + n
        self.total += other.total
        self.errors += other.errors

    def kept(self) -> list[InputProblem]:
        return [problem for _key, problem in sorted(self._heap, key=lambda item: item[0], reverse=True)]


class InputError(MonitorError):
    """A file (or option value) is wrong.  Carries the problems found (every one, or the first
    :data:`MAX_LISTED` with ``total`` and ``counts`` per kind of all of them)."""

    def __init__(self, problems: list[InputProblem] | InputProblem | str, *, total: int | None = None,
                 counts: dict[str, int] | None = None):
        if isinstance(problems, str):
            problems = [InputProblem(file="<input>", row=None, field=None, value=None, expected=problems)]
        elif isinstance(problems, InputProblem):
            problems = [problems]
        self.problems = list(problems)
        self.total = max(total if total is not None else 0, len(self.problems))
        if counts is None:
            counts = {}
            for problem in self.problems:
                kind = problem_kind(problem)
                counts[kind] = counts.get(kind, 0) + 1
        self.counts = counts
        first = self.problems[0].line() if self.problems else "invalid input"
        more = self.total - 1
        super().__init__(first if more <= 0 else f"{first} (and {more} more problem{'s' if more > 1 else ''})")

    @property
    def unlisted(self) -> int:
        """Problems counted but not listed (beyond the first :data:`MAX_LISTED`)."""
        return self.total - min(len(self.problems), MAX_LISTED)

    def summary(self) -> str:
        """One line: how many problems of each kind, most frequent first."""
        parts = [f"{n:,} x {kind}" for kind, n in sorted(self.counts.items(), key=lambda kv: (-kv[1], kv[0]))]
        return f"{self.total:,} problems in all: " + "; ".join(parts)


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


@dataclass(frozen=True)
class Diagnostic:
    """A problem with a fit or an estimate, stored on the result and shown in reports."""

    code: str        # short machine name, e.g. "not_converged", "variance_at_bound", "few_stations"
    message: str     # one plain sentence for a reader
    severity: str = "warning"  # "warning" or "info"
