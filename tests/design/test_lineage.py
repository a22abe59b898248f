"""Station lineage from replaced_by links."""

import pandas as pd
import pytest

from monitor import columns as C
from monitor.design.lineage import Relocation, lineage_keys, lineage_table
from monitor.errors import DesignError


def frame(rows):
    return pd.DataFrame(rows, columns=[C.STATION, "replaced_by", C.X, C.Y])


def test_chain_and_distance():
    st = frame([("A", "A2", 0.0, 0.0), ("A2", "A3", 3.0, 4.0), ("A3", None, 3.0, 10.0), ("B", None, 50.0, 50.0)])
    keys = lineage_keys(st)
    assert keys.to_dict() == {"A": "A", "A2": "A", "A3": "A", "B": "B"}
    table = lineage_table(st).set_index(C.STATION)
    # 3-4-5 triangle, then 6 m north (exact)
    assert table.loc["A2", "moved_m"] == 5.0
    assert table.loc["A3", "moved_m"] == 6.0
    assert table.loc["A3", "continues"] == "A2"
    assert pd.isna(table.loc["B", "moved_m"])


def test_loop_and_unknown_refused():
    with pytest.raises(DesignError, match="loop"):
        lineage_keys(frame([("A", "B", 0, 0), ("B", "A", 1, 1)]))
    with pytest.raises(DesignError, match="not a station"):
        lineage_keys(frame([("A", "Z", 0, 0)]))


def test_relocation_note():
    r = Relocation("CB-14", "CB-14R", "2020-04-20", "marker lost", True, (0.0, 0.0), (6.0, 8.0))
    assert r.distance_m == 10.0
    assert "continues CB-14" in r.note() and "10.0 m" in r.note()
    # atan2(6, 8) = 36.87 degrees east of grid north
    assert round(r.bearing_deg, 2) == 36.87 and "bearing 037" in r.note()
