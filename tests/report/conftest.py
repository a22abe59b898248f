"""Shared fixtures for the report tests: invented programmes, fitted once per module."""

from __future__ import annotations

import numpy as np
import pytest
from report_testdata import demo_inputs

from monitor.report import build_report_context


@pytest.fixture(scope="session")
def full_inputs():
    """Three invented species with every optional part (estimates, coverage, events, power...)."""
    return demo_inputs(np.random.default_rng(20251130), n_species=3)


@pytest.fixture(scope="session")
def full_context(full_inputs):
    return build_report_context(**full_inputs)


@pytest.fixture(scope="session")
def hostile_context():
    """Species, names and sites carrying markup that must come out as text."""
    return build_report_context(**demo_inputs(np.random.default_rng(7), n_species=2, hostile=True))


@pytest.fixture(scope="session")
def rendered(tmp_path_factory, full_context):
    """The full report written once: (folder, context)."""
    from monitor.report import render_report

    out = tmp_path_factory.mktemp("reports") / "report-2025"
    return render_report(full_context, out, dpi=60), full_context
