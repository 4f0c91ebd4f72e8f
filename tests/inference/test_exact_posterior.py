"""The sampler against an exact posterior computed by numerical integration.

A one-knot Poisson model (K = 2, 40 daily values, no weekday effect) has four
parameters: the knot tau and the log levels at day 0, at tau and at the end.
Its posterior is written out below from the model's definition, without the
project's model code, and integrated numerically: a fine grid in tau (the
density is continuous in tau with kinks at whole days) and, for each tau, a
rectangular grid over the three levels in coordinates whitened by the
conditional Laplace approximation (the trapezoid rule converges very fast on
such smooth, near-Gaussian integrands). Posterior means, standard deviations
and 5% / 95% quantiles of the knot, the starting level and the two growth
rates must agree with the sampler's within 4 Monte Carlo standard errors
(MCSE per Vehtari et al. 2021, computed by inference.diagnostics).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from bendline.inference import diagnostics
from bendline.inference.driver import run
from bendline.inference.model import TrendModel
from bendline.inference.series import Series
from bendline.inference.sinks import MemorySink
from bendline.inference.spec import ModelSpec, RunSettings

N = 40
MIN_SEG = 7.0


def _data():
    rng = np.random.default_rng(4040)
    t = np.arange(N)
    tau_true = 18.0
    loglam = np.where(t <= tau_true, math.log(10) + 0.06 * t, math.log(10) + 0.06 * tau_true - 0.05 * (t - tau_true))
    return rng.poisson(np.exp(loglam)).astype(float)


def _log_post(y, tau, e0, e1, e2, centre, rate_sd):
    """Unnormalised log posterior in (tau, levels), written from the model's definition.

    Value t counts the interval [t, t+1); its log mean is the average of the
    piecewise-linear log trend (levels e0 at 0, e1 at tau, e2 at N) over it.
    """
    t = np.arange(N, dtype=float)
    T = float(N)
    tau = tau[..., None]
    e0, e1, e2 = e0[..., None], e1[..., None], e2[..., None]
    r1 = (e1 - e0) / tau
    r2 = (e2 - e1) / (T - tau)
    a = np.clip(tau - t, 0.0, 1.0)  # share of interval t before the knot
    before = e0 + r1 * (t + 0.5)
    after = e1 + r2 * (t + 0.5 - tau)
    split = a * (e0 + r1 * (t + a / 2)) + (1 - a) * (e1 + r2 * (t + a + (1 - a) / 2 - tau))
    loglam = np.where(a >= 1, before, np.where(a <= 0, after, split))
    ll = (y * loglam - np.exp(loglam)).sum(axis=-1) - special.gammaln(y + 1).sum()
    r1, r2 = r1[..., 0], r2[..., 0]
    lp = ll + stats.norm.logpdf(e0[..., 0], centre, 2.0)
    lp += stats.norm.logpdf(r1, 0, rate_sd) + stats.norm.logpdf(r2, 0, rate_sd)
    lp -= np.log(tau[..., 0]) + np.log(T - tau[..., 0])  # Jacobian from rates to levels
    return lp


def _exact(y):
    centre = math.log(y[:7].mean() + 0.5)
    rate_sd = math.log(1.2) / 1.96
    taus = np.linspace(MIN_SEG, N - MIN_SEG, 521)
    dtau = taus[1] - taus[0]
    g = np.linspace(-6.5, 6.5, 27)
    dg = g[1] - g[0]
    X = np.stack(np.meshgrid(g, g, g, indexing="ij"), -1).reshape(-1, 3)
    atoms, weights = [], []
    mode = np.array([centre, centre + 1, centre])
    for i, tau in enumerate(taus):
        f = lambda e: _log_post(y, np.full(e.shape[0], tau), e[:, 0], e[:, 1], e[:, 2], centre, rate_sd)
        # Newton steps to the conditional mode, Hessian by central differences
        for _ in range(30):
            h = 1e-4
            E = np.eye(3) * h
            pts = np.vstack([mode, mode + E, mode - E])
            v = f(pts)
            grad = (v[1:4] - v[4:7]) / (2 * h)
            H = np.zeros((3, 3))
            for a in range(3):
                for b in range(3):
                    pp = np.vstack([mode + E[a] + E[b], mode + E[a] - E[b], mode - E[a] + E[b], mode - E[a] - E[b]])
                    fv = f(pp)
                    H[a, b] = (fv[0] - fv[1] - fv[2] + fv[3]) / (4 * h * h)
            step = np.linalg.solve(H, grad)
            mode = mode - step
            if np.max(np.abs(step)) < 1e-10:
                break
        L = np.linalg.cholesky(np.linalg.inv(-H))
        E = mode + X @ L.T
        lp = f(E)
        wt = dtau * (0.5 if i in (0, len(taus) - 1) else 1.0)
        logw = lp + math.log(abs(np.linalg.det(L)) * dg**3 * wt)
        atoms.append(np.column_stack([np.full(E.shape[0], tau), E[:, 0], (E[:, 1] - E[:, 0]) / tau,
                                      (E[:, 2] - E[:, 1]) / (N - tau)]))
        weights.append(logw)
    atoms = np.concatenate(atoms)
    logw = np.concatenate(weights)
    weights = np.exp(logw - special.logsumexp(logw))
    out = {}
    for k, name in enumerate(("knot", "level0", "rate1", "rate2")):
        x = atoms[:, k]
        order = np.argsort(x)
        cdf = np.cumsum(weights[order])
        mean = float(np.sum(weights * x))
        out[name] = {
            "mean": mean,
            "sd": float(np.sqrt(np.sum(weights * (x - mean) ** 2))),
            "q05": float(np.interp(0.05, cdf, x[order])),
            "q95": float(np.interp(0.95, cdf, x[order])),
        }
    return out


@pytest.mark.slow
def test_sampler_matches_the_integrated_posterior():
    y = _data()
    series = Series.from_counts("2026-04-06", y)
    spec = ModelSpec(segments=2, family="poisson", weekday=False, min_segment_days=MIN_SEG)
    settings = RunSettings(chains=8, draws=1500, seed=77, snapshot_every=100)
    sink = MemorySink()
    final = None
    for final in run(TrendModel(series, spec), settings, sink=sink):
        pass
    assert final["status"] == "converged"
    model = TrendModel(series, spec)
    pos, _ = sink.read()
    C, S, D = pos.shape
    q = model.constrain(pos.reshape(C * S, D))
    mc = {
        "knot": q["knot_days"][:, 0],
        "level0": q["log_levels"][:, 0],
        "rate1": q["growth_rate_per_day"][:, 0],
        "rate2": q["growth_rate_per_day"][:, 1],
    }
    exact = _exact(y)
    failures = []
    for name, x in mc.items():
        chains = x.reshape(C, S)
        ex = exact[name]
        mean = chains.mean()
        se_mean = diagnostics.mcse_mean(chains)
        sd = chains.std()
        se_sd = diagnostics.mcse_mean((chains - mean) ** 2) / (2 * sd)
        checks = [
            ("mean", mean, ex["mean"], se_mean),
            ("sd", sd, ex["sd"], se_sd),
            ("q05", np.quantile(x, 0.05), ex["q05"], diagnostics.mcse_quantile(chains, 0.05)),
            ("q95", np.quantile(x, 0.95), ex["q95"], diagnostics.mcse_quantile(chains, 0.95)),
        ]
        for stat, got, want, se in checks:
            if abs(got - want) > 4 * se:
                failures.append(f"{name} {stat}: sampler {got:.5g}, exact {want:.5g}, 4 MCSE {4 * se:.2g}")
    assert not failures, "\n".join(failures)
