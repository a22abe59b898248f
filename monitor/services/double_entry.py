"""Double entry: two independent keyings of the same sheets compared (nothing stored)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from monitor.io.double_entry import compare_entries


def compare_files(first: Path, second: Path) -> pd.DataFrame:
    """Double entry: every mismatch between two independent keyings of the same sheets (nothing stored).

    Columns: station, date, species, field, value_a, value_b, row_a, row_b (see
    :func:`monitor.io.double_entry.compare_entries`).
    """
    return compare_entries(Path(first), Path(second))
