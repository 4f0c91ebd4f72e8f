"""Tests for inference.loo.

Outside references:

* ArviZ 0.23.4 ``az.loo(idata, pointwise=True)`` (default ``reff`` and an
  explicit one), ``az.psislw`` and ``az.compare(method="stacking")``.
  ArviZ consumes the same seeded
  draws (``az.from_dict(posterior=..., log_likelihood=...)``).
* The KKT conditions of the stacking objective of Yao, Vehtari, Simpson &
  Gelman (2018), Bayesian Analysis (derived in the test).
* Vehtari, Simpson, Gelman, Yao & Gabry (2024), JMLR: k-hat estimates the
  generalized Pareto shape of the ratios' right tail.

Data: Poisson regressions with 0, 1 and 2 covariates on simulated counts,
posterior draws from the Laplace (normal) approximation at the mode under a
N(0, 10^2) prior on each coefficient; seeded.
"""

from __future__ import annotations

import logging
import warnings

import numpy as np
import pytest
from scipy import stats

with warnings.catch_warnings():
    warnings.simplefilter("ignore", FutureWarning)
    import arviz as az

from bendline.inference import loo as L

logging.getLogger("arviz").setLevel(logging.ERROR)
pytestmark = pytest.mark.filterwarnings("ignore::UserWarning")

RTOL = 1e-6


@pytest.fixture
def rng():
    return np.random.default_rng(7301)


def simulate(rng, n=60, outlier=True):
    x1 = rng.normal(size=n)
    x2 = rng.normal(size=n)
    y = rng.poisson(np.exp(0.5 + 0.6 * x1 + 0.4 * x2))
    if outlier:
        y[0] = 25  # one influential count -> some large Pareto k
    return x1, x2, y


def laplace_draws(rng, X, y, chains=4, draws=500, prior_sd=10.0):
    """Normal approximation at the posterior mode of a Poisson GLM.

    Returns draws (chains, draws, p) and log_lik (chains, draws, n).
    """
    b = np.zeros(X.shape[1])
    prec = np.eye(X.shape[1]) / prior_sd**2
    for _ in range(100):
        mu = np.exp(X @ b)
        grad = X.T @ (y - mu) - prec @ b
        hess = -(X.T * mu) @ X - prec
        step = np.linalg.solve(hess, grad)
        b = b - step
        if np.max(np.abs(step)) < 1e-12:
            break
    cov = np.linalg.inv(-hess)
    beta = rng.multivariate_normal(b, cov, size=(chains, draws))
    log_lik = stats.poisson.logpmf(y, np.exp(beta @ X.T))
    return beta, log_lik


def design(x1, x2, which):
    cols = [np.ones_like(x1)]
    if "x1" in which:
        cols.append(x1)
    if "x2" in which:
        cols.append(x2)
    return np.column_stack(cols)


MODELS_NESTED = {"none": (), "x1": ("x1",), "x1+x2": ("x1", "x2")}
MODELS_DISJOINT = {"none": (), "x1": ("x1",), "x2": ("x2",)}


def fit_models(rng, models, outlier=True):
    x1, x2, y = simulate(rng, outlier=outlier)
    out = {}
    for name, which in models.items():
        beta, ll = laplace_draws(rng, design(x1, x2, which), y)
        out[name] = (beta, ll)
    return out


def to_idata(beta, ll):
    return az.from_dict(posterior={"beta": beta}, log_likelihood={"y": ll})


def test_reference_version():
    assert az.__version__ == "0.23.4"


def test_loo_matches_arviz_default_reff(rng):
    """ArviZ 0.23.4 az.loo(idata, pointwise=True) with its default reff
    (mean ess_mean of the posterior / S), which relative_eff reproduces."""
    fitted = fit_models(rng, MODELS_NESTED)
    max_k = 0.0
    for name, (beta, ll) in fitted.items():
        ref = az.loo(to_idata(beta, ll), pointwise=True)
        ours = L.loo(ll, reff=L.relative_eff({"beta": beta}))
        assert ours["elpd_loo"] == pytest.approx(float(ref["elpd_loo"]), rel=RTOL), name
        assert ours["se"] == pytest.approx(float(ref["se"]), rel=RTOL), name
        assert ours["p_loo"] == pytest.approx(float(ref["p_loo"]), rel=RTOL), name
        np.testing.assert_allclose(ours["elpd_pointwise"], ref["loo_i"].values, rtol=RTOL)
        np.testing.assert_allclose(ours["pareto_k"], ref["pareto_k"].values, rtol=RTOL)
        assert ours["n_bad_k"] == int(np.sum(ref["pareto_k"].values > 0.7))
        assert ours["good_k"] == pytest.approx(float(ref["good_k"]), rel=1e-12)
        assert ours["n_samples"] == int(ref["n_samples"]) == 2000
        assert ours["n_data_points"] == int(ref["n_data_points"]) == 60
        max_k = max(max_k, max(ours["pareto_k"]))
    # the outlier makes the comparison cover k > 0.7, not only easy cases
    assert max_k > 0.7


@pytest.mark.parametrize("reff", [1.0, 0.4])
def test_loo_matches_arviz_explicit_reff_and_layouts(rng, reff):
    """ArviZ 0.23.4 az.loo(idata, pointwise=True, reff=reff); (chains, draws, n)
    and (draws, n) layouts give the same result (chains pooled chain-major)."""
    beta, ll = fit_models(rng, {"x1": ("x1",)})["x1"]
    ref = az.loo(to_idata(beta, ll), pointwise=True, reff=reff)
    ours3 = L.loo(ll, reff=reff)
    ours2 = L.loo(ll.reshape(-1, ll.shape[2]), reff=reff)
    assert ours3 == ours2
    assert ours3["elpd_loo"] == pytest.approx(float(ref["elpd_loo"]), rel=RTOL)
    assert ours3["p_loo"] == pytest.approx(float(ref["p_loo"]), rel=RTOL)
    assert ours3["se"] == pytest.approx(float(ref["se"]), rel=RTOL)
    np.testing.assert_allclose(ours3["pareto_k"], ref["pareto_k"].values, rtol=RTOL)


def test_single_chain_reff_is_one(rng):
    """ArviZ 0.23.4 az.loo uses reff = 1 for a single chain."""
    beta, ll = fit_models(rng, {"x1": ("x1",)})["x1"]
    assert L.relative_eff({"beta": beta[:1]}) == 1.0
    ref = az.loo(to_idata(beta[:1], ll[:1]), pointwise=True)
    ours = L.loo(ll[:1])
    assert ours["elpd_loo"] == pytest.approx(float(ref["elpd_loo"]), rel=RTOL)
    np.testing.assert_allclose(ours["pareto_k"], ref["pareto_k"].values, rtol=RTOL)


@pytest.mark.parametrize("normalize", [True, False])
@pytest.mark.parametrize("n_draws", [2000, 300, 20])
def test_psis_smooth_matches_arviz_psislw(rng, normalize, n_draws):
    """ArviZ 0.23.4 az.psislw(log_ratios, reff, normalize) (samples on its last
    axis, on our first). With 20 draws the tail has 4 draws: k = inf and no
    smoothing in both."""
    beta, ll = fit_models(rng, {"x1+x2": ("x1", "x2")})["x1+x2"]
    lr = -ll.reshape(-1, ll.shape[2])[:n_draws]
    ref_lw, ref_k = az.psislw(lr.T.copy(), reff=0.9, normalize=normalize)
    lw, k = L.psis_smooth(lr, reff=0.9, normalize=normalize)
    np.testing.assert_allclose(lw, ref_lw.T, rtol=1e-10, atol=1e-12)
    if n_draws == 20:
        assert np.all(np.isinf(k)) and np.all(np.isinf(ref_k))
    else:
        np.testing.assert_allclose(k, ref_k, rtol=1e-10)
    lw1, k1 = L.psis_smooth(lr[:, 3], reff=0.9, normalize=normalize)
    np.testing.assert_allclose(lw1, lw[:, 3], rtol=0, atol=0)
    assert k1 == k[3] or (np.isinf(k1) and np.isinf(k[3]))


def test_psis_weights_normalised_and_truncated(rng):
    lr = rng.standard_t(3, size=(4000, 5))
    lw, _ = L.psis_smooth(lr)
    np.testing.assert_allclose(np.exp(lw).sum(axis=0), 1.0, rtol=1e-12)
    # truncation at the largest raw weight: no smoothed weight exceeds it
    raw = lr - lr.max(axis=0)
    unnorm, _ = L.psis_smooth(lr, normalize=False)
    assert np.all(unnorm - lr.max(axis=0) <= raw.max(axis=0) + 1e-12)


@pytest.mark.parametrize("shape_k", [0.2, 0.5, 0.8])
def test_khat_recovers_generalized_pareto_shape(rng, shape_k):
    """Ratios drawn from a generalized Pareto with shape k: k-hat close to k
    (VSGYG 2024: k-hat estimates the tail shape). Tolerance 0.1 at S = 20000:
    common practice, no source (the fit uses ~420 tail draws, sd ~ 0.05)."""
    ratios = stats.genpareto.rvs(shape_k, size=20000, random_state=rng)
    _, k = L.psis_smooth(np.log(ratios))
    assert k == pytest.approx(shape_k, abs=0.1)


def _weights_by_name(cmp):
    return {name: float(w) for name, w in cmp["weight"].items()}


@pytest.mark.parametrize("models", [MODELS_NESTED, MODELS_DISJOINT], ids=["nested", "disjoint"])
def test_stacking_matches_arviz_compare(rng, models):
    """ArviZ 0.23.4 az.compare(..., method='stacking') weights to 1e-3 absolute
    (both solve the same concave problem with SLSQP; the gap is solver
    tolerance). Our pointwise elpd uses ArviZ's default reff."""
    fitted = fit_models(rng, models)
    names = list(models)
    cmp = az.compare({k: to_idata(*fitted[k]) for k in names}, method="stacking")
    ref = _weights_by_name(cmp)
    pts = np.column_stack(
        [L.loo(fitted[k][1], reff=L.relative_eff({"beta": fitted[k][0]}))["elpd_pointwise"] for k in names]
    )
    ours = L.stacking_weights(pts)
    assert ours.sum() == pytest.approx(1.0, abs=1e-12)
    for i, k in enumerate(names):
        assert ours[i] == pytest.approx(ref[k], abs=1e-3), k
    # the case is informative: weights differ clearly between models
    assert max(ours) - min(ours) > 0.3


def test_stacking_kkt_conditions(rng):
    """At the maximum of f(w) = mean_i log sum_k w_k p_ik on the simplex
    (Yao et al. 2018), df/dw_k = mean_i p_ik / (p_i . w) equals 1 where w_k > 0
    and is <= 1 where w_k = 0 (since sum_k w_k df/dw_k = 1)."""
    fitted = fit_models(rng, MODELS_DISJOINT)
    pts = np.column_stack([L.loo(ll)["elpd_pointwise"] for _, ll in fitted.values()])
    w = L.stacking_weights(pts)
    dens = np.exp(pts)
    grad = (dens / (dens @ w)[:, None]).mean(axis=0)
    for k in range(len(w)):
        if w[k] > 1e-6:
            assert grad[k] == pytest.approx(1.0, abs=1e-5)
        else:
            assert grad[k] <= 1.0 + 1e-5


def test_stacking_dominant_and_permutation(rng):
    base = rng.normal(-2.0, 0.5, size=80)
    pts = np.column_stack([base, base - 1.0, base - 0.5])
    np.testing.assert_allclose(L.stacking_weights(pts), [1.0, 0.0, 0.0], atol=1e-6)
    mixed = np.column_stack([base + rng.normal(0, 1, 80), base + rng.normal(0, 1, 80), base])
    w = L.stacking_weights(mixed)
    perm = [2, 0, 1]
    np.testing.assert_allclose(L.stacking_weights(mixed[:, perm]), w[perm], atol=1e-5)
    # very negative log densities do not underflow (rows are shifted first)
    np.testing.assert_allclose(L.stacking_weights(mixed - 2000.0), w, atol=1e-6)
    assert L.stacking_weights(pts[:, :1]).tolist() == [1.0]


def test_validation():
    with pytest.raises(ValueError, match="shape"):
        L.loo(np.zeros(5))
    with pytest.raises(ValueError, match="NaN"):
        L.loo(np.array([[0.0, np.nan], [0.0, 0.0]]))
    with pytest.raises(ValueError, match="reff"):
        L.psis_smooth(np.zeros((10, 2)), reff=0.0)
    with pytest.raises(ValueError, match="observations, models"):
        L.stacking_weights(np.zeros(4))
