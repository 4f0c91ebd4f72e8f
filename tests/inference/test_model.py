"""The model's log density and gradients.

References: the Poisson and negative-binomial log-pmfs are checked against
``scipy.stats.poisson.logpmf`` and ``scipy.stats.nbinom.logpmf`` (scipy's
``nbinom(n, p)`` with ``n = phi``, ``p = phi / (phi + mu)`` has mean ``mu`` and
variance ``mu + mu^2 / phi``); gradients against central finite differences.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from bendline.inference.errors import InputError
from bendline.inference.model import TrendModel
from bendline.inference.series import Series
from bendline.inference.spec import ChangepointPrior, ModelSpec


def _theta(model, rng, knots=(40.3, 80.7), phi=15.0):
    lv = np.log(40.0)
    th = model.unconstrain(
        [list(knots)] if model.K > 1 else np.zeros((1, 0)),
        [[lv, lv + 1.2, lv + 0.4, lv + 0.8][: model.K + (0 if model.flat else 1)]],
        jumps=[[0.1, -0.2][: model.K - 1]] if model.jumps else None,
        weekday=[[0.1, 0.2, 0, 0, 0, -0.3, -0.2]] if model.weekday else None,
        dispersion=[phi] if model.negbin else None,
    )
    return th + rng.normal(0, 0.03, th.shape)


def _likelihood_only(model, theta):
    """The log density minus the prior terms, recomputed independently."""
    p, gaps, tau = model.knot_layout(theta)
    eta, r, jumps = model._levels(theta, gaps)
    return model.log_density(theta) - model._log_prior(theta, p, gaps, tau, eta, r, jumps)


@pytest.mark.parametrize("family", ["poisson", "negbin"])
@pytest.mark.parametrize("flat", [False, True])
def test_likelihood_matches_scipy_logpmf(small_series, rng, family, flat):
    # Reference: scipy.stats.poisson / scipy.stats.nbinom log-pmf.
    model = TrendModel(small_series, ModelSpec(segments=3, family=family, flat_segments=flat))
    theta = _theta(model, rng)
    mu = np.exp(model.log_mean(theta))[0, model.obs_index]
    y = model.y_obs
    if family == "poisson":
        expected = stats.poisson.logpmf(y, mu).sum()
    else:
        phi = model.constrain(theta)["dispersion"][0]
        expected = stats.nbinom.logpmf(y, phi, phi / (phi + mu)).sum()
    assert _likelihood_only(model, theta)[0] == pytest.approx(expected, rel=1e-10, abs=1e-8)
    assert model.pointwise_log_lik(theta)[0].sum() == pytest.approx(expected, rel=1e-10, abs=1e-8)


@pytest.mark.parametrize("family", ["poisson", "negbin"])
@pytest.mark.parametrize("trend", ["continuous", "jumps", "flat"])
@pytest.mark.parametrize("centred", [False, True])
def test_gradient_matches_finite_differences(small_series, rng, family, trend, centred):
    cps = (ChangepointPrior(38, 5), ChangepointPrior(85, 10)) if centred else ()
    spec = ModelSpec(segments=3, family=family, jumps=trend == "jumps", flat_segments=trend == "flat",
                     changepoint_priors=cps, completeness=(0.5, 0.8))
    model = TrendModel(small_series, spec)
    theta = _theta(model, rng)
    lp, g = model.value_and_grad(theta)
    assert np.isfinite(lp[0])
    eps = 1e-6
    num = np.array([
        (model.log_density(theta + eps * e) - model.log_density(theta - eps * e))[0] / (2 * eps)
        for e in np.eye(model.dim)
    ])
    np.testing.assert_allclose(g[0], num, rtol=1e-4, atol=1e-4 * (1 + np.abs(num).max()))


@pytest.mark.parametrize("phi", [2.0, 40.0, 1e5])
@pytest.mark.parametrize("flat", [False, True])
def test_fast_gradient_agrees_with_exact(small_series, rng, phi, flat):
    model = TrendModel(small_series, ModelSpec(segments=3, family="negbin", jumps=not flat, flat_segments=flat))
    theta = np.concatenate([_theta(model, rng, phi=phi) for _ in range(5)])
    _, exact = model.value_and_grad(theta)
    fast = model.grad(theta)
    np.testing.assert_allclose(fast, exact, rtol=1e-3, atol=1e-3 * (1 + np.abs(exact).max()))


def test_batched_rows_equal_single_rows(small_series, rng):
    model = TrendModel(small_series, ModelSpec(segments=3))
    theta = np.concatenate([_theta(model, rng) for _ in range(6)])
    lp, g = model.value_and_grad(theta)
    for i in range(6):
        lpi, gi = model.value_and_grad(theta[i])
        assert lpi[0] == pytest.approx(lp[i], rel=1e-12)
        np.testing.assert_allclose(gi[0], g[i], rtol=1e-10, atol=1e-10)


def test_impossible_parameters_give_minus_infinity_not_errors(small_series, rng):
    model = TrendModel(small_series, ModelSpec(segments=3))
    theta = _theta(model, rng)
    wild = np.repeat(theta, 3, axis=0)
    wild[0, model.slices["trend"]] = 1e6  # overflowing mean
    wild[1] = np.nan
    wild[2, model.slices["z"]] = [1e308, -1e308]
    lp, g = model.value_and_grad(wild)
    assert np.all(lp == -np.inf)
    assert np.all(g == 0.0)
    fast = model.grad(wild)
    assert np.all(np.isfinite(fast))
    assert np.all(fast[1] == 0.0)


def test_constrain_and_unconstrain_round_trip(small_series):
    model = TrendModel(small_series, ModelSpec(segments=3, jumps=True))
    knots = [[33.0, 77.5]]
    levels = [[3.0, 4.0, 3.5, 3.7]]
    theta = model.unconstrain(knots, levels, jumps=[[0.2, -0.1]], weekday=[[0.1, 0, 0, 0, 0, -0.05, -0.05]], dispersion=[12.0])
    q = model.constrain(theta)
    np.testing.assert_allclose(q["knots"], knots)
    np.testing.assert_allclose(q["log_levels"], levels)
    np.testing.assert_allclose(q["jumps"], [[0.2, -0.1]])
    np.testing.assert_allclose(q["dispersion"], [12.0])
    np.testing.assert_allclose(q["weekday"].sum(axis=1), 0.0, atol=1e-12)
    np.testing.assert_allclose(q["rates"][0], np.diff(levels[0]) / np.diff([0, 33.0, 77.5, 120.0]))


def test_log_trend_is_the_interval_mean_of_the_piecewise_linear_trend(small_series):
    # value t counts [t, t+1); its log mean is the average of the
    # piecewise-linear log trend over that interval (checked by fine quadrature)
    model = TrendModel(small_series, ModelSpec(segments=3, weekday=False))
    theta = model.unconstrain([[30.4, 70.0]], [[2.0, 3.5, 2.5, 3.0]])
    t = np.array([0.0, 15.0, 30.0, 50.0, 70.0, 119.0, 125.0])
    got = model.log_trend(theta, t)[0]
    edges, levels = [0, 30.4, 70, 120], [2.0, 3.5, 2.5, 3.0]
    s = np.linspace(0, 1, 20001)
    expected = [np.trapezoid(np.interp(ti + s, edges, levels), s) for ti in t[:-1]]
    np.testing.assert_allclose(got[:-1], expected, rtol=1e-8)
    # past the end the last segment continues
    assert got[-1] == pytest.approx(3.0 + 5.5 * (0.5 / 50))


def test_jumps_are_steps_at_the_change_date_averaged_over_the_interval(small_series):
    model = TrendModel(small_series, ModelSpec(segments=2, weekday=False, jumps=True))
    theta = model.unconstrain([[40.25]], [[2.0, 2.0, 2.0]], jumps=[[0.8]])
    got = model.log_trend(theta, np.array([39.0, 40.0, 41.0]))[0]
    np.testing.assert_allclose(got, [2.0, 2.0 + 0.8 * 0.75, 2.8])


def test_uniform_knot_prior_is_uniform_over_ordered_positions(small_series, rng):
    # Dirichlet(1,...,1) on the gap fractions: the density of two knots in
    # (z1, z2) coordinates is prod p_k up to a constant. Monte Carlo check: a
    # density proportional to exp(log prior) over z, sampled by importance
    # from a wide Gaussian, gives knot means at the uniform order statistics.
    model = TrendModel(small_series, ModelSpec(segments=3, weekday=False, family="poisson"))
    z = rng.normal(0, 4, (200000, 2))
    theta = np.zeros((z.shape[0], model.dim))
    theta[:, model.slices["z"]] = z
    p, gaps, tau = model.knot_layout(theta)
    logw = np.log(p).sum(axis=1) - stats.norm.logpdf(z, 0, 4).sum(axis=1)
    w = np.exp(logw - logw.max())
    w /= w.sum()
    m = model.min_segment
    # uniform ordered pair on the slack: E[frac_1] = 1/3, E[frac_1 + frac_2] = 2/3
    f1 = (tau[:, 0] - m) / model.slack
    f2 = (tau[:, 1] - 2 * m) / model.slack
    assert np.sum(w * f1) == pytest.approx(1 / 3, abs=0.01)
    assert np.sum(w * f2) == pytest.approx(2 / 3, abs=0.01)


def test_too_short_series_is_refused_with_the_numbers():
    s = Series.from_counts("2026-01-01", np.arange(20.0))
    with pytest.raises(InputError) as e:
        TrendModel(s, ModelSpec(segments=3, min_segment_days=14))
    msg = str(e.value)
    assert "20 values" in msg and "3 segments" in msg and "14 days" in msg
    # left to the default, the minimum segment shrinks to fit, down to two days
    assert TrendModel(s, ModelSpec(segments=3)).spec.min_segment_days == 2.0
    with pytest.raises(InputError, match="5 values are too few for 3 segments of at least 2 days"):
        TrendModel(Series.from_counts("2026-01-01", np.arange(5.0)), ModelSpec(segments=3))


def test_too_few_observed_values_is_refused():
    values = np.full(60, np.nan)
    values[:5] = 3
    s = Series.from_counts("2026-01-01", values)
    with pytest.raises(InputError, match="only 5 observed values"):
        TrendModel(s, ModelSpec(segments=2))


def test_a_series_of_zeros_is_refused_not_fitted():
    # all zeros: no trend to estimate; a fit would report a steep decline and a halving time
    with pytest.raises(InputError, match="every one of the 60 counts that enter the fit is zero"):
        TrendModel(Series.from_counts("2026-01-01", np.zeros(60)), ModelSpec(segments=2))
    # zeros everywhere except in the values left out as incomplete: refused as well
    values = np.zeros(60)
    values[-3:] = 4
    with pytest.raises(InputError, match="is zero"):
        TrendModel(Series.from_counts("2026-01-01", values), ModelSpec(segments=2, drop_last=3))
    values[10] = 1  # one case is enough to fit (the data then speak for a low level)
    TrendModel(Series.from_counts("2026-01-01", values), ModelSpec(segments=2, drop_last=3))


def test_drop_last_leaves_values_out_of_the_likelihood(small_series, rng):
    full = TrendModel(small_series, ModelSpec(segments=3))
    cut = TrendModel(small_series, ModelSpec(segments=3, drop_last=7))
    theta = _theta(full, rng)
    assert cut.obs_index.size == full.obs_index.size - 7
    mu = np.exp(full.log_mean(theta))[0]
    y = full.y
    phi = full.constrain(theta)["dispersion"][0]
    last = stats.nbinom.logpmf(y[-7:], phi, phi / (phi + mu[-7:])).sum()
    assert (_likelihood_only(full, theta) - _likelihood_only(cut, theta))[0] == pytest.approx(last, rel=1e-9)


def test_weekday_effect_refused_for_weekly_series():
    s = Series.from_counts("2026-01-05", np.arange(60.0) + 5, interval_days=7)
    with pytest.raises(InputError, match="day-of-week"):
        TrendModel(s, ModelSpec(segments=2, weekday=True))
    m = TrendModel(s, ModelSpec(segments=2))
    assert not m.weekday
    assert m.min_segment == pytest.approx(4.0)


def test_rate_prior_scale_is_in_the_analysts_terms():
    spec = ModelSpec(growth_rate_prior_pct_per_day=20)
    assert spec.growth_rate_prior_sd_per_day * 1.96 == pytest.approx(math.log(1.2))
