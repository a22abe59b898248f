"""Shared fixtures for the trend tests: the committed reference data and values."""

import json
from pathlib import Path

import pandas as pd
import pytest

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures" / "trend"


@pytest.fixture(scope="session")
def glmm_data() -> pd.DataFrame:
    """Invented data (tests/fixtures/trend/make_data.py) that reference_fits.R fitted."""
    return pd.read_csv(FIXTURES / "glmm_data.csv")


@pytest.fixture(scope="session")
def reference() -> dict:
    """Values written by tests/fixtures/trend/reference_fits.R (R 4.2.2, lme4 1.1-31, glmmTMB 1.1.5)."""
    return json.loads((FIXTURES / "reference_values.json").read_text())


@pytest.fixture(scope="session")
def cbpp() -> pd.DataFrame:
    """lme4's cbpp data (Lesnoff et al. 2004), exported by reference_fits.R."""
    return pd.read_csv(FIXTURES / "cbpp.csv")
