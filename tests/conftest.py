"""Shared fixtures: one seeded generator, small simulated series."""

from __future__ import annotations

import os

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

SAMPLES = os.path.join(ROOT, "sample_series")


@pytest.fixture
def rng():
    """The one seeded generator tests draw from."""
    return np.random.default_rng(20261201)


@pytest.fixture
def small_series():
    """120 invented daily values, 3 segments, weekday effect, negative binomial."""
    from bendline.inference.simulate import simulate

    series, truth = simulate(
        np.random.default_rng(5), "2026-02-02", 120, start_level=40.0,
        knot_days=[40.0, 80.0], growth_rate_per_day=[0.03, -0.025, 0.01],
        weekday_effect=[1.1, 1.2, 1.0, 1.0, 0.95, 0.75, 0.8], dispersion=30.0,
    )
    return series
