r"""Revisit (panel) designs: which stations are visited in which year.

Notation (McDonald 2003): ``[v-r]`` is a panel visited ``v`` consecutive years then rested
``r`` years, repeating; ``[1-0]`` is visited every year; ``[1-3]`` needs four panels that
take turns, one a year.  A split design joins patterns: ``[1-0,1-3]`` (also written
``[(1-0),(1-3)]``) is an every-year panel plus four rotating panels.

A pattern ``[v-r]`` with :math:`r > 0` has :math:`c = v + r` panels, panel :math:`j`
(:math:`j = 0..c-1`) being due in year :math:`t` when

.. math:: t \ge t_0 \quad\text{and}\quad (t - t_0 - j) \bmod c < v,

so each year exactly :math:`v` of the :math:`c` panels are visited.  Panel codes are the
pattern followed by the panel number: ``1-0``, ``1-3/1``, ``1-3/2``, ...

Spreading panels over the reserve: a panel should itself be a spatially balanced sample.
Along a BAS order every *contiguous run* is balanced (Robertson et al. 2013), but every
k-th point is not (:math:`\phi_2(2m) = \phi_2(m)/2 < 1/2`: every second point of a base-2
sequence lies in the western half), so balanced placements are cut into consecutive
blocks.  Other placements are ordered along a Hilbert curve and dealt out in turn, which
spreads each panel over the whole area.

References
----------
McDonald, T. L. (2003). Review of environmental monitoring methods: survey designs.
Environmental Monitoring and Assessment 85:277-292.
Urquhart, N. S. and Kincaid, T. M. (1999). Designs for detecting trend from repeated
surveys of ecological resources. Journal of Agricultural, Biological, and Environmental
Statistics 4:404-414.
Robertson, B. L., Brown, J. A., McDonald, T. and Jaksons, P. (2013). Biometrics 69:776-784.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.design.placement import hilbert_order
from monitor.errors import DesignError


@dataclass(frozen=True)
class RevisitPattern:
    """One ``[visit-rest]`` member of a revisit design."""

    visit: int
    rest: int

    def __post_init__(self) -> None:
        if self.visit < 1 or self.rest < 0:
            raise DesignError(f"revisit pattern [{self.visit}-{self.rest}] needs visit >= 1 and rest >= 0")

    @property
    def always(self) -> bool:
        return self.rest == 0

    @property
    def n_panels(self) -> int:
        return 1 if self.always else self.visit + self.rest

    @property
    def label(self) -> str:
        return f"{self.visit}-{self.rest}"


@dataclass(frozen=True)
class Panel:
    """A set of stations that share a revisit rule."""

    code: str
    visit: int
    rest: int
    offset: int

    def is_due(self, year: int, start_year: int) -> bool:
        if year < start_year:
            return False
        if self.rest == 0:
            return True
        return (year - start_year - self.offset) % (self.visit + self.rest) < self.visit

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "visit": self.visit, "rest": self.rest, "offset": self.offset}


_PATTERN = re.compile(r"^\(?\s*(\d+)\s*-\s*(\d+|inf|∞)\s*\)?$")


def parse_revisit(text: str) -> tuple[RevisitPattern, ...]:
    """Parse McDonald (2003) revisit notation, e.g. ``"[1-0]"``, ``"[1-3]"``, ``"[1-0,1-3]"``.

    The outer brackets are optional; members may be written ``(1-0)``.  A never-revisited
    member (``1-inf``) needs new stations every year and is refused here.
    """
    if not isinstance(text, str) or not text.strip():
        raise DesignError("revisit design is empty; expected notation like [1-0] or [1-0,1-3]")
    body = text.strip()
    if body.startswith("[") and body.endswith("]"):
        body = body[1:-1]
    parts = [p.strip() for p in body.split(",")]
    out = []
    for part in parts:
        m = _PATTERN.match(part)
        if not m:
            raise DesignError(f"cannot read revisit pattern {part!r} in {text!r}; expected e.g. [1-0] or [1-3]")
        if m.group(2) in ("inf", "∞"):
            raise DesignError(f"pattern {part!r} never revisits: it needs new stations each year, "
                              "which a permanent-quadrat design does not have")
        out.append(RevisitPattern(int(m.group(1)), int(m.group(2))))
    labels = [p.label for p in out]
    if len(set(labels)) != len(labels):
        raise DesignError(f"revisit design {text!r} repeats a pattern")
    return tuple(out)


def format_revisit(patterns: Sequence[RevisitPattern]) -> str:
    """Write patterns in McDonald (2003) notation: ``[1-0]``, ``[1-0,1-3]``."""
    return "[" + ",".join(p.label for p in patterns) + "]"


@dataclass(frozen=True)
class PanelDesign:
    """A revisit design with its first year.

    Examples
    --------
    >>> d = PanelDesign.parse("[1-0,1-3]", start_year=2025)
    >>> [p.code for p in d.panels]
    ['1-0', '1-3/1', '1-3/2', '1-3/3', '1-3/4']
    """

    patterns: tuple[RevisitPattern, ...]
    start_year: int

    @classmethod
    def parse(cls, text: str, start_year: int) -> PanelDesign:
        return cls(parse_revisit(text), int(start_year))

    @property
    def notation(self) -> str:
        return format_revisit(self.patterns)

    @property
    def panels(self) -> tuple[Panel, ...]:
        out = []
        for p in self.patterns:
            if p.always:
                out.append(Panel(p.label, p.visit, p.rest, 0))
            else:
                out += [Panel(f"{p.label}/{j + 1}", p.visit, p.rest, j) for j in range(p.n_panels)]
        return tuple(out)

    def panel(self, code: str) -> Panel:
        for p in self.panels:
            if p.code == code:
                return p
        raise DesignError(f"panel {code!r} is not in revisit design {self.notation}")

    def is_due(self, panel_code: str, year: int) -> bool:
        return self.panel(panel_code).is_due(year, self.start_year)

    def panel_table(self, years: Sequence[int]) -> pd.DataFrame:
        """Panels x years: True where the panel is visited (the usual revisit-design table)."""
        return pd.DataFrame({int(y): [p.is_due(int(y), self.start_year) for p in self.panels] for y in years},
                            index=pd.Index([p.code for p in self.panels], name=C.PANEL))

    def to_dict(self) -> dict[str, Any]:
        return {"notation": self.notation, "start_year": self.start_year,
                "panels": [p.to_dict() for p in self.panels]}


def _deal(order: np.ndarray, sizes: list[int]) -> np.ndarray:
    """Deal positions 0..n-1 out to panels so each panel's positions are evenly spaced."""
    n = int(sum(sizes))
    target = np.array(sizes, float) / n
    got = np.zeros(len(sizes))
    out = np.empty(n, dtype=int)
    for i in range(n):
        deficit = target * (i + 1) - got
        deficit[got >= np.array(sizes)] = -np.inf
        k = int(np.argmax(deficit))
        out[i] = k
        got[k] += 1
    return out


def assign_panels(stations: pd.DataFrame, design: PanelDesign,
                  sizes: Mapping[str, int] | None = None, *, order: str = "order") -> pd.DataFrame:
    """Assign stations to the design's panels so each panel is spread across the reserve.

    Parameters
    ----------
    stations : DataFrame
        Columns station, x, y [m]; an ``order`` column (BAS acceptance order) when the
        placement was balanced.
    design : PanelDesign
    sizes : mapping panel code -> number of stations, optional
        Default: as equal as possible, earlier panels taking the remainder.
    order : str
        Name of the balanced-order column.

    Returns
    -------
    DataFrame
        A copy of ``stations`` with a ``panel`` column.

    Notes
    -----
    With a balanced order the panels take consecutive blocks of it (each a balanced
    sample); otherwise stations are ranked along a Hilbert curve and dealt out in turn.

    References
    ----------
    McDonald (2003) Environ Monit Assess 85:277-292; Robertson et al. (2013) Biometrics 69:776-784.
    """
    if stations.empty:
        raise DesignError("no stations to assign to panels")
    panels = design.panels
    codes = [p.code for p in panels]
    n = len(stations)
    if sizes is None:
        base, extra = divmod(n, len(panels))
        size_list = [base + (1 if i < extra else 0) for i in range(len(panels))]
    else:
        unknown = [k for k in sizes if k not in codes]
        if unknown:
            raise DesignError(f"panel {unknown[0]!r} is not in revisit design {design.notation}")
        size_list = [int(sizes.get(c, 0)) for c in codes]
        if sum(size_list) != n or min(size_list) < 0:
            raise DesignError(f"panel sizes add to {sum(size_list)} but there are {n} stations")
    out = stations.copy()
    if order in out.columns and out[order].notna().all():
        rank = np.argsort(np.argsort(out[order].to_numpy(), kind="stable"), kind="stable")
        bounds = np.cumsum([0] + size_list)
        panel_of_rank = np.searchsorted(bounds, np.arange(n), side="right") - 1
    else:
        rank = hilbert_order(out[C.X].to_numpy(), out[C.Y].to_numpy())
        panel_of_rank = _deal(np.arange(n), size_list)
    out[C.PANEL] = [codes[panel_of_rank[r]] for r in rank]
    return out


def due_table(assignments: pd.DataFrame, design: PanelDesign, first_year: int, n_years: int) -> pd.DataFrame:
    """Which stations are due in which year, for ``n_years`` from ``first_year``.

    Returns
    -------
    DataFrame
        Index station, columns the years (int), values bool; plus a leading ``panel`` column.
    """
    if n_years < 1:
        raise DesignError("number of years must be at least 1")
    years = range(int(first_year), int(first_year) + int(n_years))
    table = design.panel_table(years)
    missing = set(assignments[C.PANEL]) - set(table.index)
    if missing:
        raise DesignError(f"panel {sorted(missing)[0]!r} is not in revisit design {design.notation}")
    due = table.loc[assignments[C.PANEL].to_numpy()].reset_index(drop=True)
    due.index = pd.Index(assignments[C.STATION].to_numpy(), name=C.STATION)
    due.insert(0, C.PANEL, assignments[C.PANEL].to_numpy())
    return due
