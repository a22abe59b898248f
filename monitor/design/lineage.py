"""Station lineage: a quadrat that is moved or re-marked continues the series of the one it replaces.

A relocation never edits the old station: the old one is retired (or marked lost) with
``replaced_by`` pointing at a new station, which carries its own position, date set out and
fix.  The chain old -> new -> newer is a *lineage*, named by its first station.  Analyses that
follow a population through time treat a lineage as one station (one station effect in the
trend models); listings show each station with the chain it belongs to.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor.errors import DesignError

REPLACED_BY = "replaced_by"      # code of the station that continues this one [text] or empty
PREDECESSOR = "continues"        # code of the station this one continues [text] or empty
MOVED_M = "moved_m"              # distance from the station it continues [m] or NaN


def _blank(value: object) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value)) or value is pd.NA or value == ""


def predecessors(stations: pd.DataFrame) -> dict[str, str]:
    """Map station -> the station it continues (from ``replaced_by`` links).

    When two stations name the same replacement (two quadrats merged into one), the replacement
    continues the first of them in code order and the other chain ends there.
    """
    out: dict[str, str] = {}
    codes = set(stations[C.STATION].astype(str))
    for old, new in sorted(zip(stations[C.STATION].astype(str), stations[REPLACED_BY], strict=True)):
        if _blank(new):
            continue
        new = str(new)
        if new not in codes:
            raise DesignError(f"station {old} is replaced by {new}, which is not a station of the programme")
        if new == old:
            raise DesignError(f"station {old} is recorded as replaced by itself")
        out.setdefault(new, old)
    return out


def lineage_keys(stations: pd.DataFrame) -> pd.Series:
    """The lineage of every station: the first station of its relocation chain (itself when none).

    Parameters
    ----------
    stations : DataFrame
        ``station`` and ``replaced_by`` (code of the station that continues it, blank if none).

    Returns
    -------
    Series indexed by station code, values the lineage's first station code.
    """
    pred = predecessors(stations)
    keys = {}
    for code in stations[C.STATION].astype(str):
        seen = {code}
        root = code
        while root in pred:
            root = pred[root]
            if root in seen:
                raise DesignError(f"stations {' -> '.join(sorted(seen))} replace one another in a loop")
            seen.add(root)
        keys[code] = root
    return pd.Series(keys, name=C.LINEAGE)


@dataclass(frozen=True)
class Relocation:
    """A quadrat moved (or re-marked after its marker was lost) on ``date``: ``old`` continues as ``new``."""

    old: str
    new: str
    date: str
    reason: str
    lost: bool
    old_xy: tuple[float, float]
    new_xy: tuple[float, float]

    @property
    def distance_m(self) -> float:
        """Straight-line distance moved [m] (projected coordinates)."""
        return float(math.hypot(self.new_xy[0] - self.old_xy[0], self.new_xy[1] - self.old_xy[1]))

    @property
    def bearing_deg(self) -> float:
        """Grid bearing from the old position to the new one [degrees clockwise from grid north]."""
        dx, dy = self.new_xy[0] - self.old_xy[0], self.new_xy[1] - self.old_xy[1]
        return float(math.degrees(math.atan2(dx, dy)) % 360.0)

    def note(self) -> str:
        """The line written into the new station's relocation notes (how to find it from the old one)."""
        why = "marker lost" if self.lost else "moved"
        return (f"continues {self.old} ({why} {self.date}); {self.distance_m:.1f} m at grid bearing "
                f"{self.bearing_deg:03.0f} from the old position")


def lineage_table(stations: pd.DataFrame) -> pd.DataFrame:
    """Per station: its lineage, the station it continues, and the distance moved from it [m]."""
    keys = lineage_keys(stations)
    pred = predecessors(stations)
    xy = stations.assign(**{C.STATION: stations[C.STATION].astype(str)}).set_index(C.STATION)[[C.X, C.Y]]
    codes = list(stations[C.STATION].astype(str))
    moved = []
    for code in codes:
        before = pred.get(code)
        if before is None:
            moved.append(np.nan)
        else:
            a, b = xy.loc[before], xy.loc[code]
            moved.append(float(math.hypot(float(b[C.X]) - float(a[C.X]), float(b[C.Y]) - float(a[C.Y]))))
    return pd.DataFrame({C.STATION: codes, C.LINEAGE: [keys[c] for c in codes],
                         PREDECESSOR: [pred.get(c, "") for c in codes], MOVED_M: moved})
