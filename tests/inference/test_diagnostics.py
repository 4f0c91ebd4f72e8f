"""Tests for inference.diagnostics.

Outside references used here:

* ArviZ 0.23.4: ``az.rhat(x, method="rank")``, ``az.ess(x, method="bulk" |
  "tail" | "mean")``, ``az.mcse(x, method="mean" | "quantile", prob=p)``,
  ``az.rhat(x, method="identity")``, ``az.summary(..., round_to="none")``.
  Agreement is asked to 1e-8 relative (the module reproduces ArviZ's
  arithmetic, so the observed gap is ~1e-15).
* Vehtari, Gelman, Simpson, Carpenter & Bürkner (2021), Bayesian Analysis,
  (rank normalisation, z = Phi^-1((r - 3/8)/(S + 1/4))).
* The AR(1) integrated autocorrelation time tau = (1 + phi) / (1 - phi):
  rho_t = phi^t, so tau = 1 + 2 sum_{t>=1} phi^t (elementary derivation,
  no outside source needed).
"""

from __future__ import annotations

import json
import logging
import warnings

import numpy as np
import pytest
from scipy import stats

with warnings.catch_warnings():
    warnings.simplefilter("ignore", FutureWarning)
    import arviz as az

from bendline.inference import diagnostics as dg

logging.getLogger("arviz").setLevel(logging.ERROR)

RTOL = 1e-8


@pytest.fixture
def rng():
    return np.random.default_rng(20240917)


def ar1(rng, chains, draws, phi, mu=None, extra=()):
    """Stationary AR(1) chains, shape (chains, draws, *extra)."""
    e = rng.normal(size=(chains, draws) + tuple(extra))
    x = np.empty_like(e)
    x[:, 0] = e[:, 0] / np.sqrt(1 - phi**2)
    for t in range(1, draws):
        x[:, t] = phi * x[:, t - 1] + e[:, t]
    if mu is not None:
        x += np.reshape(mu, (chains, 1) + (1,) * len(extra))
    return x


def make_case(kind, shape, rng):
    c, n = shape
    if kind == "iid":
        return rng.normal(size=shape)
    if kind == "ar0.95":
        return ar1(rng, c, n, 0.95)
    if kind == "ar0.999":
        return ar1(rng, c, n, 0.999)
    if kind == "antithetic":
        return ar1(rng, c, n, -0.6)
    if kind == "different_means":
        return ar1(rng, c, n, 0.5, mu=1.5 * np.arange(c))
    if kind == "discrete":
        return rng.poisson(1.0, size=shape).astype(float)
    if kind == "heavy_tail":
        return rng.standard_cauchy(size=shape)
    raise AssertionError(kind)


SHAPES = [(4, 1000), (2, 50), (16, 100), (64, 40), (1, 500), (3, 7), (2, 5), (4, 4)]
KINDS = ["iid", "ar0.95", "ar0.999", "antithetic", "different_means", "discrete", "heavy_tail"]


def close(ours, ref, rtol=RTOL):
    ours = np.asarray(ours, dtype=float)
    ref = np.asarray(ref, dtype=float)
    assert ours.shape == ref.shape
    assert np.array_equal(np.isnan(ours), np.isnan(ref)), (ours, ref)
    ok = ~np.isnan(ref)
    np.testing.assert_allclose(ours[ok], ref[ok], rtol=rtol, atol=0)


def test_reference_version():
    """The numbers below are checked against this exact ArviZ release."""
    assert az.__version__ == "0.23.4"


@pytest.mark.parametrize("shape", SHAPES, ids=lambda s: f"{s[0]}x{s[1]}")
@pytest.mark.parametrize("kind", KINDS)
def test_matches_arviz(kind, shape, rng):
    """ArviZ 0.23.4 az.rhat(method='rank'), az.ess(method='bulk'|'tail'|'mean'),
    az.mcse(method='mean'|'quantile') on 2-D (chain, draw) arrays."""
    x = make_case(kind, shape, rng)
    close(dg.rhat(x), az.rhat(x, method="rank"))
    close(dg.ess_bulk(x), az.ess(x, method="bulk"))
    close(dg.ess_tail(x), az.ess(x, method="tail"))
    close(dg.ess_mean(x), az.ess(x, method="mean"))
    close(dg.mcse_mean(x), az.mcse(x, method="mean"))
    for p in (0.05, 0.5, 0.9):
        close(dg.mcse_quantile(x, p), az.mcse(x, method="quantile", prob=p))
        close(dg.ess_quantile(x, p), az.ess(x, method="quantile", prob=p))


def test_geyer_truncation_at_chain_end():
    """A short chain where Geyer's sequence runs to the end of the chain with a
    positive last pair but a negative last even lag: ArviZ 0.23.4
    az.ess(method='mean' | 'bulk') keeps that lag in tau (array found by a
    search over small rounded-normal arrays)."""
    x = np.array(
        [
            [0.2, 0.9, -0.1, -1.1, -0.3, 0.2, -1.3, 1.0, 1.0, -1.5],
            [-0.1, 0.4, -0.3, 0.4, -1.3, 0.8, 1.0, 0.3, 1.4, 0.8],
        ]
    )
    close(dg.ess_mean(x), az.ess(x, method="mean"))
    close(dg.ess_bulk(x), az.ess(x, method="bulk"))
    close(dg.mcse_mean(x), az.mcse(x, method="mean"))


def test_single_chain_rhat_is_nan_like_arviz(rng):
    """ArviZ 0.23.4 az.rhat(method='rank') requires 2 chains and returns NaN;
    ESS is defined for one chain (split into two)."""
    x = rng.normal(size=(1, 500))
    assert np.isnan(az.rhat(x, method="rank"))
    assert np.isnan(dg.rhat(x))
    assert dg.ess_bulk(x) == pytest.approx(float(az.ess(x, method="bulk")), rel=RTOL)
    # a 1-D array is one chain, as np.atleast_2d makes it in ArviZ
    assert dg.ess_bulk(x[0]) == pytest.approx(dg.ess_bulk(x), rel=0)


def test_too_few_draws_is_nan(rng):
    """Fewer than 4 draws: ArviZ 0.23.4 returns NaN for every diagnostic."""
    x = rng.normal(size=(4, 3))
    for fn in (dg.rhat, dg.ess_bulk, dg.ess_tail, dg.ess_mean, dg.mcse_mean):
        assert np.isnan(fn(x))
    assert np.isnan(az.ess(x, method="bulk"))


@pytest.mark.parametrize("shape", [(4, 1000), (2, 50), (1, 500)])
def test_constant_array(shape):
    """Constant draws. Our choice: R-hat NaN (0/0), every ESS = number of
    split draws, MCSE 0; this is what ArviZ 0.23.4 returns for each."""
    x = np.full(shape, 3.25)
    c, n = shape
    assert np.isnan(dg.rhat(x))
    assert np.isnan(az.rhat(x, method="rank"))
    for ours, ref in [
        (dg.ess_bulk(x), az.ess(x, method="bulk")),
        (dg.ess_tail(x), az.ess(x, method="tail")),
        (dg.ess_mean(x), az.ess(x, method="mean")),
    ]:
        assert ours == float(c * 2 * (n // 2)) == float(ref)
    assert dg.mcse_mean(x) == 0.0 == float(az.mcse(x, method="mean"))
    assert dg.mcse_quantile(x, 0.05) == 0.0 == float(az.mcse(x, method="quantile", prob=0.05))


def test_vectorised_over_parameters(rng):
    """(chains, draws, params) gives, per parameter, the ArviZ 0.23.4 value of
    that parameter's (chains, draws) slice, for a mix of parameter kinds."""
    c, n = 8, 300
    cols = [
        rng.normal(size=(c, n)),
        ar1(rng, c, n, 0.97),
        ar1(rng, c, n, 0.3, mu=np.linspace(0, 2, c)),
        np.full((c, n), -1.0),
        rng.poisson(0.5, size=(c, n)).astype(float),
    ]
    x = np.stack(cols, axis=2)
    got = {
        "rhat": dg.rhat(x),
        "bulk": dg.ess_bulk(x),
        "tail": dg.ess_tail(x),
        "mean": dg.ess_mean(x),
        "mcse": dg.mcse_mean(x),
        "mcse_q": dg.mcse_quantile(x, 0.95),
    }
    for key, val in got.items():
        assert val.shape == (len(cols),), key
    for i, col in enumerate(cols):
        close(got["rhat"][i], az.rhat(col, method="rank"))
        close(got["bulk"][i], az.ess(col, method="bulk"))
        close(got["tail"][i], az.ess(col, method="tail"))
        close(got["mean"][i], az.ess(col, method="mean"))
        close(got["mcse"][i], az.mcse(col, method="mean"))
        close(got["mcse_q"][i], az.mcse(col, method="quantile", prob=0.95))


def test_parameter_shape_is_kept(rng):
    x = rng.normal(size=(4, 200, 2, 3))
    assert dg.rhat(x).shape == (2, 3)
    assert dg.ess_tail(x).shape == (2, 3)
    close(dg.ess_bulk(x)[1, 2], dg.ess_bulk(x[:, :, 1, 2]))


def test_nan_only_poisons_its_parameter(rng):
    """A NaN draw gives NaN for that parameter (as ArviZ 0.23.4 does for a 2-D
    array) and leaves the others unchanged."""
    x = rng.normal(size=(4, 100, 3))
    x[2, 17, 1] = np.nan
    r = dg.rhat(x)
    e = dg.ess_bulk(x)
    assert np.isnan(r[1]) and np.isnan(e[1])
    assert np.isnan(az.rhat(x[:, :, 1], method="rank"))
    close(r[[0, 2]], [dg.rhat(x[:, :, 0]), dg.rhat(x[:, :, 2])])
    close(e[[0, 2]], [dg.ess_bulk(x[:, :, 0]), dg.ess_bulk(x[:, :, 2])])


def test_unconverged_chains_flagged(rng):
    """Chains with different means: R-hat far above 1.01 (the threshold
    VGSCB 2021 recommend), iid chains: below it."""
    bad = ar1(rng, 4, 1000, 0.5, mu=[0.0, 0.0, 0.0, 1.0])
    good = rng.normal(size=(4, 1000))
    assert dg.rhat(bad) > 1.05
    assert dg.rhat(good) < 1.01


def test_rhat_detects_scale_difference_through_folding(rng):
    """Same location, different scale: bulk R-hat misses it, the folded R-hat
    catches it (VGSCB 2021, the reason for folding)."""
    x = rng.normal(size=(4, 1000)) * np.array([1.0, 1.0, 1.0, 3.0])[:, None]
    bulk = float(az.rhat(x, method="z_scale"))  # ArviZ 0.23.4: bulk part only
    assert bulk < 1.01
    assert dg.rhat(x) > 1.05


def test_ar1_ess_near_theory(rng):
    """ESS of AR(1) chains ~ S (1 - phi) / (1 + phi) (elementary AR(1) result,
    see module docstring). 20% tolerance: common practice, no source; the
    sampling error of the estimate at this length is a few per cent."""
    phi = 0.9
    x = ar1(rng, 8, 5000, phi)
    theory = x.size * (1 - phi) / (1 + phi)
    assert dg.ess_mean(x) == pytest.approx(theory, rel=0.2)
    assert dg.ess_bulk(x) == pytest.approx(theory, rel=0.2)


def test_iid_mcse_close_to_sd_over_sqrt_n(rng):
    x = rng.normal(size=(4, 2500))
    assert dg.mcse_mean(x) == pytest.approx(1.0 / np.sqrt(x.size), rel=0.15)


def test_rank_normalize_formula(rng):
    """VGSCB 2021 rank normalisation: z = Phi^-1((r - 3/8) / (S + 1/4)), r average ranks
    over all chains jointly (computed here with scipy.stats.rankdata)."""
    x = rng.poisson(3.0, size=(3, 40, 2)).astype(float)  # many ties
    z = dg.rank_normalize(x)
    assert z.shape == x.shape
    for i in range(2):
        flat = x[:, :, i].ravel()
        r = stats.rankdata(flat, method="average")
        expect = stats.norm.ppf((r - 0.375) / (flat.size + 0.25)).reshape(3, 40)
        np.testing.assert_allclose(z[:, :, i], expect, rtol=1e-12)
    zz = dg.rank_normalize(rng.normal(size=(4, 250)))
    assert abs(zz.mean()) < 1e-12
    assert zz.std() == pytest.approx(1.0, abs=0.01)


def test_split_chains(rng):
    x = np.arange(2 * 7).reshape(2, 7)
    s = dg.split_chains(x)
    np.testing.assert_array_equal(s, [[0, 1, 2], [7, 8, 9], [4, 5, 6], [11, 12, 13]])
    y = rng.normal(size=(3, 10, 4))
    assert dg.split_chains(y).shape == (6, 5, 4)
    np.testing.assert_array_equal(dg.split_chains(y)[3], y[0, 5:])


def test_bad_prob():
    x = np.zeros((2, 10))
    with pytest.raises(ValueError, match="prob"):
        dg.mcse_quantile(x, 1.0)
    with pytest.raises(ValueError, match="prob"):
        dg.ess_quantile(x, 0.0)


# ---------------------------------------------------------------- nested R-hat


def test_nested_rhat_one_chain_per_superchain_vs_arviz(rng):
    """With M = 1 chain per superchain, nR-hat^2 - 1 = B/(N W) =
    R-hat_classic^2 - (N - 1)/N, R-hat_classic from ArviZ 0.23.4
    az.rhat(method='identity') (Gelman et al. 2013, BDA3 chapter 11; no split, no ranks)."""
    x = ar1(rng, 6, 80, 0.4, mu=[0, 0, 0.3, 0, 0, 0.1])
    n = x.shape[1]
    classic = float(az.rhat(x, method="identity"))
    nested = dg.nested_rhat(x, n_superchains=6)
    assert nested**2 - 1 == pytest.approx(classic**2 - (n - 1) / n, rel=1e-10)


def test_nested_rhat_by_hand():
    """Hand computation of the Margossian et al. (2022) definition on
    K = 2 superchains of M = 2 chains of N = 2 draws."""
    x = np.array([[0.0, 2.0], [2.0, 4.0], [5.0, 7.0], [7.0, 9.0]])
    # chain means 1, 3, 6, 8; superchain means 2, 7; grand mean 4.5
    b_nu = ((2 - 4.5) ** 2 + (7 - 4.5) ** 2) / 1  # 12.5
    b_tilde = ((1 - 2) ** 2 + (3 - 2) ** 2) / 1  # 2 for both superchains
    w_tilde = 2.0  # each chain: ((-1)^2 + 1^2) / 1
    w_nu = b_tilde + w_tilde  # 4
    assert dg.nested_rhat(x, 2) == pytest.approx(np.sqrt(1 + b_nu / w_nu), rel=1e-14)


def test_nested_rhat_many_short_chains(rng):
    """Many short chains, one draw each (N = 1 is allowed when M > 1):
    converged superchains give nR-hat near 1; one displaced superchain gives a
    large value. 1.01 / 1.1 cut-offs: common practice, no source."""
    k, m, n = 8, 32, 1
    good = rng.normal(size=(k * m, n, 3))
    assert np.all(dg.nested_rhat(good, k) < 1.1)
    bad = good.copy()
    bad[:m] += 2.0
    assert np.all(dg.nested_rhat(bad, k) > 1.1)
    assert dg.nested_rhat(good, k).shape == (3,)


def test_nested_rhat_invariant_to_affine_maps(rng):
    x = rng.normal(size=(12, 20))
    assert dg.nested_rhat(3 * x - 7, 4) == pytest.approx(dg.nested_rhat(x, 4), rel=1e-12)


def test_nested_rhat_validation():
    x = np.zeros((6, 10))
    with pytest.raises(ValueError, match="divide"):
        dg.nested_rhat(x, 4)
    with pytest.raises(ValueError, match=">= 2"):
        dg.nested_rhat(x, 1)
    with pytest.raises(ValueError, match="more than one"):
        dg.nested_rhat(np.zeros((4, 1)), 4)


# ------------------------------------------------------------------ summarize


def test_summarize_matches_arviz_summary(rng):
    """ArviZ 0.23.4 az.summary(idata, round_to='none'): mean, sd (ddof 1),
    mcse_mean, ess_bulk, ess_tail, r_hat; quantiles against numpy's default
    (type 7) quantile."""
    a = ar1(rng, 4, 500, 0.8)
    b = ar1(rng, 4, 500, 0.2, extra=(2,)) + 5.0
    draws = {"a": a, "b": b}
    rows = dg.summarize(draws)
    assert [r["name"] for r in rows] == ["a", "b[0]", "b[1]"]
    idata = az.from_dict(posterior=draws)
    ref = az.summary(idata, round_to="none")
    for row, label in zip(rows, ["a", "b[0]", "b[1]"]):
        for ours, theirs in [
            ("mean", "mean"),
            ("sd", "sd"),
            ("mcse_mean", "mcse_mean"),
            ("ess_bulk", "ess_bulk"),
            ("ess_tail", "ess_tail"),
            ("rhat", "r_hat"),
        ]:
            assert row[ours] == pytest.approx(float(ref.loc[label, theirs]), rel=RTOL), (label, ours)
    flat = a.ravel()
    assert rows[0]["q05"] == pytest.approx(np.quantile(flat, 0.05), rel=1e-14)
    assert rows[0]["q50"] == pytest.approx(np.median(flat), rel=1e-14)
    assert rows[0]["q95"] == pytest.approx(np.quantile(flat, 0.95), rel=1e-14)


def test_summarize_array_form_and_json(rng):
    x = rng.normal(size=(4, 200, 3))
    x[:, :, 2] = 1.0  # constant: rhat undefined -> None
    rows = dg.summarize(x, names=["alpha", "beta", "fixed"])
    text = json.dumps(rows, allow_nan=False)
    assert json.loads(text) == rows
    assert set(rows[0]) == {
        "name", "mean", "sd", "q05", "q50", "q95", "rhat", "ess_bulk", "ess_tail", "mcse_mean",
    }
    assert rows[2]["rhat"] is None
    assert rows[2]["ess_bulk"] == 800.0
    assert rows[2]["mcse_mean"] == 0.0
    assert rows[1]["rhat"] == pytest.approx(dg.rhat(x[:, :, 1]), rel=1e-14)
    assert rows[0]["ess_tail"] == pytest.approx(dg.ess_tail(x[:, :, 0]), rel=1e-14)
    default = dg.summarize(x)
    assert [r["name"] for r in default] == ["x[0]", "x[1]", "x[2]"]
    with pytest.raises(ValueError, match="names"):
        dg.summarize(x, names=["a"])


def test_summarize_rejects_mismatched_dict(rng):
    with pytest.raises(ValueError, match="differs"):
        dg.summarize({"a": rng.normal(size=(4, 100)), "b": rng.normal(size=(4, 99))})
