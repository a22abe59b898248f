"""monitor.quality: checks on stored records (pure; DataFrames in, a flags DataFrame out)."""

from monitor.quality.checks import (
    FLAG_COLUMNS,
    missing_covariates,
    observer_differences,
    observer_pairs,
    overdue_stations,
    quality_flags,
    station_jumps,
)

__all__ = ["FLAG_COLUMNS", "missing_covariates", "observer_differences", "observer_pairs", "overdue_stations",
           "quality_flags", "station_jumps"]
