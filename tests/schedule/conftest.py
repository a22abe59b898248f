"""Every test here fails if the code under test touched global random state."""

import random

import numpy as np
import pytest


@pytest.fixture(autouse=True)
def _no_global_random_state():
    before_np = np.random.get_state(legacy=False)
    before_py = random.getstate()
    yield
    after_np = np.random.get_state(legacy=False)
    assert np.array_equal(after_np["state"]["key"], before_np["state"]["key"]) and (
        after_np["state"]["pos"] == before_np["state"]["pos"]
    ), "numpy global random state was used"
    assert random.getstate() == before_py, "Python's global random state was used"
