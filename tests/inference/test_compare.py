"""Segment-count support by PSIS-LOO and stacking."""

from __future__ import annotations

import numpy as np
import pytest

from bendline.inference.compare import compare_segments, support_from_fits
from bendline.inference.errors import InputError
from bendline.inference.simulate import simulate


def _fit(k, pointwise, feasible=True):
    p = np.asarray(pointwise, dtype=float)
    return {"segments": k, "feasible": feasible, "elpd_loo": float(p.sum()), "se": 1.0,
            "p_loo": 2.0 * k, "n_bad_k": 0, "converged": True, "pointwise": p.tolist()}


def test_recommends_the_smallest_count_close_to_the_best(rng):
    base = rng.normal(-2.0, 0.3, 200)
    fits = [
        _fit(1, base - 0.2),  # clearly worse: 40 below
        _fit(2, base),  # the best
        _fit(3, base - 0.005),  # 1 below: close, but more segments
        {"segments": 4, "feasible": False, "reason": "too short"},
    ]
    out = support_from_fits(fits)
    assert [o["segments"] for o in out] == [1, 2, 3, 4]
    assert [o["recommended"] for o in out] == [False, True, False, False]
    assert sum(o["weight"] for o in out) == pytest.approx(1.0, abs=1e-3)
    assert out[0]["weight"] < 0.01
    assert out[0]["elpd_diff"] == pytest.approx(40.0, rel=1e-6)
    assert out[3]["feasible"] is False and out[3]["reason"] == "too short"


def test_no_feasible_count_is_an_input_error():
    with pytest.raises(InputError, match="no segment count"):
        support_from_fits([{"segments": 1, "feasible": False, "reason": "x"}])


@pytest.mark.slow
def test_two_segment_data_get_two_segments():
    series, _ = simulate(np.random.default_rng(31), "2026-01-05", 120, start_level=20.0,
                         knot_days=[60.0], growth_rate_per_day=[0.04, -0.04], dispersion=50.0)
    out, averaged = compare_segments(series, {"family": "negbin", "weekday": False, "seed": 3}, ks=(1, 2, 3),
                                     workers=1)
    rec = [o["segments"] for o in out if o["recommended"]]
    assert rec == [2]
    assert out[0]["elpd_diff"] > 20  # one segment cannot follow a rise and a fall
    assert out[0]["weight"] < 0.05
    # the change probability averaged over K sums to the expected number of change dates
    expected = sum(o["weight"] * (o["segments"] - 1) for o in out if o["weight"])
    assert sum(averaged["probability"]) == pytest.approx(expected, rel=1e-3)
    assert len(averaged["edges_day"]) == len(averaged["probability"]) + 1 == series.n + 1


def _member(k, elpd, converged, pointwise):
    return {"segments": k, "feasible": True, "elpd_loo": elpd, "se": 3.0, "p_loo": 4.0, "n_bad_k": 0,
            "converged": converged, "pointwise": pointwise, "change_days": [0.0] * 5, "interval_days": 1}


def test_an_unconverged_member_gets_no_weight_and_no_advice():
    rng = np.random.default_rng(4)
    base = rng.normal(-2.0, 0.3, 50)
    fits = [_member(1, base.sum() - 30, True, list(base - 0.6)), _member(2, base.sum(), True, list(base)),
            _member(3, base.sum() + 50, False, list(base + 1.0))]  # looks best, but did not converge
    support = support_from_fits(fits)
    k3 = support[2]
    assert k3["weight"] is None and k3["elpd_diff"] is None and not k3["recommended"] and not k3["converged"]
    assert "did not converge" in k3["note"]
    assert [s["segments"] for s in support if s["recommended"]] == [2]
    assert sum(s["weight"] for s in support if s["weight"]) == pytest.approx(1.0, abs=1e-3)


def test_loo_of_a_real_fit_matches_arviz():
    # Reference: ArviZ 0.23.4 az.loo on the same pointwise log-likelihood
    # draws, with the same relative efficiency (Vehtari, Gelman & Gabry 2017).
    import arviz as az

    from bendline.inference.compare import LOO_DRAWS, loo_summary
    from bendline.inference.driver import run
    from bendline.inference.loo import relative_eff
    from bendline.inference.model import TrendModel
    from bendline.inference.sinks import MemorySink
    from bendline.inference.spec import ModelSpec, RunSettings
    from bendline.inference.summaries import reported_quantities

    series, _ = simulate(np.random.default_rng(8), "2026-01-05", 80, start_level=25.0,
                         knot_days=[40.0], growth_rate_per_day=[0.03, -0.03])
    spec = ModelSpec(segments=2, family="poisson", weekday=False)
    sink = MemorySink()
    for final in run(TrendModel(series, spec), RunSettings(chains=4, draws=300, max_draws=300, seed=2), sink=sink):
        pass
    pos, _ = sink.read()
    model = TrendModel(series, spec)
    ours = loo_summary(model, pos, final)
    assert pos.shape[0] * pos.shape[1] <= LOO_DRAWS  # no thinning here, so both see the same draws
    ll = model.pointwise_log_lik(pos.reshape(-1, pos.shape[2])).reshape(pos.shape[0], pos.shape[1], -1)
    _, values = reported_quantities(model, pos)
    idata = az.from_dict(posterior={"x": values[..., 0]}, log_likelihood={"y": ll})
    ref = az.loo(idata, pointwise=True, reff=relative_eff(values))
    assert ours["elpd_loo"] == pytest.approx(float(ref.elpd_loo), rel=1e-9)
    assert ours["p_loo"] == pytest.approx(float(ref.p_loo), rel=1e-9)
    assert ours["se"] == pytest.approx(float(ref.se), rel=1e-9)
