"""Tests for inference.reproduction.

Outside reference: Wallinga & Lipsitch (2007), Proc. R. Soc. B, R = 1/M(-r)
with M the moment generating function of the generation interval. The closed
form is checked against a direct numerical integral of
M(-r) = int_0^inf exp(-r t) g(t) dt with ``scipy.integrate.quad`` and
``scipy.stats.gamma.pdf`` (shape a = mean^2/sd^2, scale sd^2/mean).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from bendline.inference.errors import InputError
from bendline.inference.reproduction import gamma_gi, reproduction_number


@pytest.fixture
def rng():
    return np.random.default_rng(424242)


def mgf_by_quadrature(r, mean, sd):
    """M(-r) = int_0^inf exp(-r t) g(t) dt for the gamma density g."""
    a = mean**2 / sd**2
    scale = sd**2 / mean
    logpdf = stats.gamma(a, scale=scale).logpdf

    def integrand(t):
        # in log space: exp(-r t) alone overflows far in the tail when r < 0
        return math.exp(-r * t + logpdf(t)) if t > 0 else 0.0

    # split at the mean so quad sees the bulk; integrable t^(a-1) at 0 if a < 1
    head, _ = integrate.quad(integrand, 0, mean, limit=200)
    tail, _ = integrate.quad(integrand, mean, np.inf, limit=200)
    return head + tail


CASES = [
    # (r per day, mean days, sd days)
    (0.1, 5.0, 2.0),
    (-0.1, 5.0, 2.0),
    (0.25, 6.5, 4.2),
    (-0.05, 6.5, 4.2),
    (0.03, 3.0, 3.0),  # exponential
    (0.2, 4.0, 6.0),  # shape < 1: density singular at 0
    (-0.1, 4.0, 6.0),  # 1 + r sd^2/mean = 0.1, close to the divergence
    (0.0, 5.0, 2.0),
    (0.5, 2.6, 1.5),
]


@pytest.mark.parametrize("r, mean, sd", CASES)
def test_closed_form_against_quadrature(r, mean, sd):
    """Wallinga & Lipsitch (2007): R = 1/M(-r); M(-r) by scipy.integrate.quad."""
    expected = 1.0 / mgf_by_quadrature(r, mean, sd)
    assert reproduction_number(r, mean, sd) == pytest.approx(expected, rel=1e-7)


@pytest.mark.parametrize("r, mean, sd", CASES)
def test_closed_form_formula(r, mean, sd):
    """R = (1 + r sd^2/mean)^(mean^2/sd^2) as written in the brief/WL 2007."""
    assert reproduction_number(r, mean, sd) == pytest.approx(
        (1 + r * sd**2 / mean) ** (mean**2 / sd**2), rel=1e-12
    )


def test_zero_growth_gives_one():
    for mean, sd in [(5.0, 2.0), (5.0, 0.0), (5.0, 5.0), (3.0, 7.0)]:
        assert reproduction_number(0.0, mean, sd) == 1.0


def test_exponential_limit():
    """sd = mean: exponential interval, M(-r) = 1/(1 + r mean), R = 1 + r mean."""
    r = np.array([-0.2, -0.05, 0.0, 0.1, 0.7])
    np.testing.assert_array_equal(reproduction_number(r, 4.0, 4.0), 1 + r * 4.0)
    # and the general formula approaches it continuously
    near = reproduction_number(r, 4.0, 4.0 * (1 + 1e-9))
    np.testing.assert_allclose(near, 1 + r * 4.0, rtol=1e-7)
    # decline faster than 1/mean: MGF diverges, R = 0
    assert reproduction_number(-0.3, 4.0, 4.0) == 0.0


def test_fixed_interval_limit():
    """sd = 0: point-mass interval, M(-r) = exp(-r mean), R = exp(r mean); the
    gamma formula converges to it as sd -> 0."""
    r = np.array([-0.3, -0.1, 0.0, 0.05, 0.4])
    np.testing.assert_allclose(reproduction_number(r, 5.0, 0.0), np.exp(5.0 * r), rtol=1e-15)
    for sd in (1e-2, 1e-4, 1e-7):
        # (1 + r sd^2/m)^(m^2/sd^2) = exp(r m - r^2 sd^2 / 2 + ...)
        np.testing.assert_allclose(
            reproduction_number(r, 5.0, sd), np.exp(5.0 * r), rtol=max(sd**2, 1e-13)
        )


def test_divergent_mgf_returns_zero_and_limit_is_continuous():
    """r <= -mean/sd^2: the gamma MGF at -r diverges, R = 0; approaching from
    above R -> 0 (documented choice)."""
    mean, sd = 4.0, 6.0
    b = mean / sd**2
    assert reproduction_number(-b, mean, sd) == 0.0
    assert reproduction_number(-2 * b, mean, sd) == 0.0
    approach = reproduction_number(-b * (1 - np.logspace(-1, -8, 8)), mean, sd)
    assert np.all(np.diff(approach) < 0)  # decreasing towards the boundary
    assert approach[-1] < 1e-3
    # quad confirms M(-r) is already large just above the boundary
    # (closed form there: 0.01^(-a) = 100^0.444 = 7.7)
    assert mgf_by_quadrature(-0.99 * b, mean, sd) == pytest.approx(0.01 ** (-mean**2 / sd**2), rel=1e-6)


def test_monotone_in_r(rng):
    r = np.sort(rng.uniform(-0.1, 0.5, size=50))
    R = reproduction_number(r, 5.2, 1.7)
    assert np.all(np.diff(R) > 0)


@pytest.mark.parametrize("shape", [(), (7,), (3, 4), (2, 3, 5), (0,)])
def test_vectorised_shapes(rng, shape):
    r = rng.uniform(-0.2, 0.4, size=shape)
    R = reproduction_number(r, 5.0, 2.5)
    if shape == ():
        assert isinstance(R, float)
    else:
        assert isinstance(R, np.ndarray) and R.shape == shape
        flat = [reproduction_number(float(v), 5.0, 2.5) for v in np.ravel(r)]
        np.testing.assert_allclose(np.ravel(R), flat, rtol=1e-15)
    assert isinstance(reproduction_number(0.1, 5.0, 2.0), float)
    assert reproduction_number([0.1, 0.2], 5.0, 0.0).shape == (2,)


def test_nan_and_inf_growth():
    out = reproduction_number(np.array([np.nan, np.inf]), 5.0, 2.0)
    assert np.isnan(out[0]) and out[1] == np.inf
    assert np.isnan(reproduction_number(np.nan, 5.0, 5.0))
    assert np.isnan(reproduction_number(np.nan, 5.0, 0.0))


def test_gamma_gi_parameters():
    gi = gamma_gi(5.0, 2.0)
    assert gi.shape == pytest.approx(6.25) and gi.rate == pytest.approx(1.25)
    assert gi.shape / gi.rate == pytest.approx(5.0)
    assert math.sqrt(gi.shape) / gi.rate == pytest.approx(2.0)
    assert not gi.is_fixed
    fixed = gamma_gi(4, 0)
    assert fixed.is_fixed and fixed.shape == math.inf and fixed.rate == math.inf
    assert fixed.mean_days == 4.0


@pytest.mark.parametrize(
    "mean, sd, match, column",
    [
        (5.0, -1.0, "sd_days must be >= 0", "sd_days"),
        (0.0, 2.0, "mean_days must be > 0", "mean_days"),
        (-3.0, 2.0, "mean_days must be > 0", "mean_days"),
        (float("nan"), 2.0, "mean_days must be finite", "mean_days"),
        (5.0, float("inf"), "sd_days must be finite", "sd_days"),
        ("five", 2.0, "mean_days must be a number", "mean_days"),
    ],
)
def test_validation_messages(mean, sd, match, column):
    with pytest.raises(InputError, match=match) as info:
        gamma_gi(mean, sd)
    assert info.value.column == column
    assert isinstance(info.value, ValueError)
    with pytest.raises(InputError, match=match):
        reproduction_number(0.1, mean, sd)
