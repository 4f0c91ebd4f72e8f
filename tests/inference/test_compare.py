"""Segment-count support by PSIS-LOO and stacking."""

from __future__ import annotations

import numpy as np
import pytest

from inference.compare import compare_segments, support_from_fits
from inference.errors import InputError
from inference.simulate import simulate


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
    out = compare_segments(series, {"family": "negbin", "weekday": False, "seed": 3}, ks=(1, 2, 3), workers=1)
    rec = [o["segments"] for o in out if o["recommended"]]
    assert rec == [2]
    assert out[0]["elpd_diff"] > 20  # one segment cannot follow a rise and a fall
    assert out[0]["weight"] < 0.05


def test_loo_of_a_real_fit_matches_arviz():
    # Reference: ArviZ 0.23.4 az.loo on the same pointwise log-likelihood
    # draws, with the same relative efficiency (Vehtari, Gelman & Gabry 2017).
    import arviz as az

    from inference.compare import LOO_DRAWS, loo_summary
    from inference.driver import run
    from inference.loo import relative_eff
    from inference.model import TrendModel
    from inference.sinks import MemorySink
    from inference.spec import ModelSpec, RunSettings
    from inference.summaries import reported_quantities

    series, _ = simulate(np.random.default_rng(8), "2026-01-05", 80, start_level=25.0,
                         knot_days=[40.0], growth_rate_per_day=[0.03, -0.03])
    spec = ModelSpec(segments=2, family="poisson", weekday=False)
    sink = MemorySink()
    for final in run(series, spec, RunSettings(chains=4, draws=300, max_draws=300, seed=2), sink=sink):
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
