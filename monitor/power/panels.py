"""Revisit designs in McDonald's (2003) notation, parsed and expanded for simulation.

A revisit design says in which years each permanent station is visited.  McDonald writes a
panel member as ``[a-b]``: a station is visited ``a`` consecutive years, then rested ``b``
years, and the cycle repeats; the member therefore has ``a + b`` panels, started one year apart,
so that every year the same share of the member's stations is visited.  ``[1-0]`` is the
every-year design, ``[1-3]`` four panels each visited once every four years, ``[2-3]`` five
panels each visited two years running then rested three.  Members are joined with commas in a
split-panel design: ``[1-0,1-3]`` keeps one group of stations visited every year and rotates the
other through four panels.

This is a small parser of our own for the power stage; it does not depend on ``monitor.design``.

References
----------
McDonald, T. L. (2003). Review of environmental monitoring methods: survey designs.
Environmental Monitoring and Assessment 85:277-292.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from monitor.errors import DesignError

_MEMBER = re.compile(r"^\s*\(?\s*(\d+)\s*-\s*(\d+|n|inf|∞)\s*\)?\s*$")


@dataclass(frozen=True)
class PanelMember:
    """One member ``[on-off]`` of a revisit design."""

    on: int    # consecutive years a panel is visited
    off: int   # years it then rests

    @property
    def n_panels(self) -> int:
        return self.on + self.off

    def visited(self, panel: int, year_offset: int) -> bool:
        """Whether panel ``panel`` (0-based) is visited in year ``year_offset`` (0 = first year)."""
        return (year_offset - panel) % self.n_panels < self.on


@dataclass(frozen=True)
class RevisitDesign:
    """A parsed revisit design: its members and the share of stations each member holds."""

    members: tuple[PanelMember, ...]
    shares: tuple[float, ...]
    notation: str

    @property
    def every_year(self) -> bool:
        """True when every station is visited every year (``[1-0]``)."""
        return all(m.off == 0 for m in self.members)

    def visit_matrix(self, n_stations: int, n_years: int) -> np.ndarray:
        """Boolean matrix ``[station, year_offset]``: is the station due that year.

        Stations are dealt to members in proportion to ``shares`` (largest remainder, first
        stations to the first member), and within a member to its panels in turn
        (station k of the member -> panel k mod (on+off)), so panels are as equal as the
        numbers allow and, when stations are listed site by site, spread over sites.
        """
        if n_stations < 1 or n_years < 1:
            raise DesignError("a revisit design needs at least one station and one year")
        counts = _allocate(n_stations, self.shares)
        member_of = _interleave(counts)
        due = np.zeros((n_stations, n_years), dtype=bool)
        years = np.arange(n_years)
        position = [0] * len(counts)
        for station, i in enumerate(member_of):
            member = self.members[i]
            panel = position[i] % member.n_panels
            position[i] += 1
            due[station] = (years - panel) % member.n_panels < member.on
        return due

    def visited_share(self, n_years: int) -> float:
        """Expected share of station-years that are due, over ``n_years`` (for approximations)."""
        share = 0.0
        years = np.arange(n_years)
        for member, weight in zip(self.members, self.shares, strict=True):
            frac = np.mean([np.mean((years - p) % member.n_panels < member.on) for p in range(member.n_panels)])
            share += weight * frac
        return float(share)


def _allocate(n: int, shares: tuple[float, ...]) -> list[int]:
    """Split ``n`` into integer counts proportional to ``shares`` (largest remainder)."""
    raw = np.asarray(shares, dtype=float) * n
    counts = np.floor(raw).astype(int)
    for i in np.argsort(-(raw - counts), kind="stable")[: n - counts.sum()]:
        counts[i] += 1
    return [int(c) for c in counts]


def _interleave(counts: list[int]) -> np.ndarray:
    """Member index of each station when members are dealt evenly along the station list."""
    slots = [((k + 0.5) / c, i) for i, c in enumerate(counts) for k in range(c)]
    return np.array([i for _, i in sorted(slots)], dtype=int)


def parse_revisit(notation: str, shares: tuple[float, ...] | None = None) -> RevisitDesign:
    """Parse McDonald's revisit notation, e.g. ``"[1-0]"``, ``"[1-3]"``, ``"[1-0,1-3]"``.

    Parameters
    ----------
    notation : str
        Members ``a-b`` inside square brackets, separated by commas.  ``a`` >= 1 years on,
        ``b`` >= 0 years off.  Never-revisited members (``1-n``) are refused: a permanent
        station seen once carries no information on its own trend.
    shares : tuple of float, optional
        Share of stations in each member; equal shares when omitted.

    Returns
    -------
    RevisitDesign

    References
    ----------
    McDonald, T. L. (2003). Environmental Monitoring and Assessment 85:277-292.
    """
    text = notation.strip()
    if not (text.startswith("[") and text.endswith("]")):
        raise DesignError(f"revisit design {notation!r}: expected McDonald notation such as '[1-0]' or '[1-0,1-3]'")
    members = []
    for part in text[1:-1].split(","):
        match = _MEMBER.match(part)
        if match is None:
            raise DesignError(f"revisit design {notation!r}: member {part.strip()!r} is not of the form 'a-b'")
        on, off = match.group(1), match.group(2)
        if off in ("n", "inf", "∞"):
            raise DesignError(
                f"revisit design {notation!r}: never-revisited members cannot be simulated for permanent stations"
            )
        if int(on) < 1:
            raise DesignError(f"revisit design {notation!r}: a panel must be visited at least one year")
        members.append(PanelMember(int(on), int(off)))
    if shares is None:
        shares = tuple(1.0 / len(members) for _ in members)
    if len(shares) != len(members) or any(s < 0 for s in shares) or sum(shares) <= 0:
        raise DesignError(f"revisit design {notation!r}: need one non-negative share per member")
    total = float(sum(shares))
    return RevisitDesign(tuple(members), tuple(float(s) / total for s in shares), text)
