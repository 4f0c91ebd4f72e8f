"""The change-date relocation move: the conditions that keep it exact.

The move is a generalised Gibbs step on a group orbit (Liu & Sabatti 2000,
Biometrika 87(2)): it leaves the posterior invariant when (1) every member of
a window generates the same window, with the same candidates in the same
order, (2) the candidates' weights from any member differ only by a constant
(the posterior density times the Jacobian of the map), and (3) the density
is taken in the coordinates the lattice lives in (knot positions). These are
checked here exactly, the Jacobians against finite differences; the whole
sampler is checked against exact posteriors in test_step_model.py
(enumeration) and test_calibration.py (simulation-based calibration).
"""

from __future__ import annotations

import numpy as np
import pytest

from bendline.inference.conditional import Binned, conditional_mode, design, linear_index, offsets
from bendline.inference.init import find_starts
from bendline.inference.model import TrendModel
from bendline.inference.relocate import knot_log_density, move, orbit, whole_range_index, whole_range_size
from bendline.inference.spec import ModelSpec

SPECS = {
    "continuous, negbin, weekday": ModelSpec(segments=4, family="negbin"),
    "jumps, poisson": ModelSpec(segments=3, family="poisson", jumps=True, weekday=False),
    "flat, negbin": ModelSpec(segments=3, family="negbin", flat_segments=True),
}


def _states(model, rng, n=6):
    modes, _, chol = find_starts(model, rng, n_random=64, n_polish=8, iterations=60)
    base = modes[np.arange(n) % modes.shape[0]]
    return base + 0.3 * rng.standard_normal(base.shape) @ chol.T


@pytest.mark.parametrize("name", list(SPECS))
def test_every_member_of_a_window_generates_the_same_window(small_series, rng, name):
    model = TrendModel(small_series, SPECS[name])
    theta = _states(model, rng)
    B, W = theta.shape[0], 12
    j = rng.integers(0, model.K - 1, size=B)
    h = rng.uniform(1.0, 9.0, size=B)
    s = rng.integers(0, W, size=B)
    cand, member, log_jac = orbit(model, theta, j, h, s, W)
    w = knot_log_density(model, cand.reshape(B * W, -1)).reshape(B, W) + log_jac
    _, _, tau = model.knot_layout(theta)
    checked = 0
    for b in range(B):
        moved = tau[b, j[b]]
        for m in np.flatnonzero(member[b]):
            y = cand[b, m][None, :]
            pos = moved + (m - s[b]) * h[b]
            _, _, tau_y = model.knot_layout(y)
            j_y = int(np.argmin(np.abs(tau_y[0] - pos)))  # the moved date's rank in y
            cand_y, member_y, log_jac_y = orbit(model, y, np.array([j_y]), h[b:b + 1], np.array([m]), W)
            assert np.array_equal(member_y[0], member[b])
            np.testing.assert_allclose(cand_y[0][member[b]], cand[b][member[b]], rtol=1e-7, atol=1e-7)
            w_y = knot_log_density(model, cand_y[0]) + log_jac_y[0]
            diff = (w_y - w[b])[member[b]]
            np.testing.assert_allclose(diff, diff[0], atol=1e-6)  # equal up to a constant
            checked += 1
    assert checked > B  # windows with several members were checked


@pytest.mark.parametrize("name", list(SPECS))
def test_a_whole_range_lattice_is_the_same_set_from_every_member(small_series, rng, name):
    # The default lattice spans a change date's whole admissible range,
    # anchored at the current point's index: every feasible member must see
    # the same feasible candidates (positions and levels) with weights that
    # differ by a constant, and the lattice must reach past both ends.
    model = TrendModel(small_series, SPECS[name])
    theta = _states(model, rng)
    B = theta.shape[0]
    j = rng.integers(0, model.K - 1, size=B)
    h = rng.uniform(0.7, 1.4, size=B) * (model.t_end - 2 * model.min_segment) / 10
    size = whole_range_size(model, h.min())
    _, _, tau = model.knot_layout(theta)
    x = tau[np.arange(B), j]
    s = whole_range_index(model, x, h)
    assert np.all(x - s * h < model.min_segment)  # below the range ...
    assert np.all(x + (size - 1 - s) * h > model.t_end - model.min_segment)  # ... and past it
    cand, member, log_jac = orbit(model, theta, j, h, s, size)
    w = knot_log_density(model, cand.reshape(B * size, -1)).reshape(B, size) + log_jac
    checked = 0
    for b in range(B):
        feasible = cand[b][member[b]]
        for m in np.flatnonzero(member[b]):
            pos = x[b] + (m - s[b]) * h[b]
            _, _, tau_y = model.knot_layout(cand[b, m][None, :])
            j_y = int(np.argmin(np.abs(tau_y[0] - pos)))
            s_y = whole_range_index(model, np.array([tau_y[0, j_y]]), h[b:b + 1])
            cand_y, member_y, log_jac_y = orbit(model, cand[b, m][None, :], np.array([j_y]), h[b:b + 1], s_y, size)
            assert member_y[0].sum() == member[b].sum()
            np.testing.assert_allclose(cand_y[0][member_y[0]], feasible, rtol=1e-7, atol=1e-7)
            w_y = knot_log_density(model, cand_y[0]) + log_jac_y[0]
            diff = w_y[member_y[0]] - w[b][member[b]]
            np.testing.assert_allclose(diff, diff[0], atol=1e-6)
            checked += 1
    assert checked > 2 * B  # lattices with several members were checked


@pytest.mark.parametrize("name", list(SPECS))
def test_the_map_jacobian_matches_finite_differences(small_series, rng, name):
    # log_jac[m] - log_jac[s] must be log |det d(levels') / d(levels)| of the map
    # from the current point to candidate m (knots and the rest held).
    model = TrendModel(small_series, SPECS[name])
    theta = _states(model, rng, n=1)
    W = 8
    j, h, s = np.array([0]), np.array([4.0]), np.array([3])
    cand, member, log_jac = orbit(model, theta, j, h, s, W)
    idx = linear_index(model)
    m = next(k for k in np.flatnonzero(member[0]) if k != 3)
    eps = 1e-6
    J = np.empty((idx.size, idx.size))
    for a, i in enumerate(idx):
        up, down = theta.copy(), theta.copy()
        up[0, i] += eps
        down[0, i] -= eps
        cu = orbit(model, up, j, h, s, W)[0][0, m, idx]
        cd = orbit(model, down, j, h, s, W)[0][0, m, idx]
        J[:, a] = (cu - cd) / (2 * eps)
    assert np.linalg.slogdet(J)[1] == pytest.approx(log_jac[0, m] - log_jac[0, 3], abs=1e-5)


def test_knot_density_divides_by_the_jacobian_of_knots_in_logits(small_series, rng):
    model = TrendModel(small_series, ModelSpec(segments=4))
    theta = _states(model, rng, n=3)
    z = np.arange(model.dim)[model.slices["z"]]
    eps = 1e-6
    for row in theta:
        J = np.empty((z.size, z.size))
        for a, i in enumerate(z):
            up, down = row.copy(), row.copy()
            up[i] += eps
            down[i] -= eps
            J[:, a] = (model.knot_layout(up[None])[2][0] - model.knot_layout(down[None])[2][0]) / (2 * eps)
        expected = model.log_density(row[None])[0] - np.linalg.slogdet(J)[1]
        got = knot_log_density(model, row[None])[0]
        assert got - expected == pytest.approx((model.K - 1) * np.log(model.slack), abs=1e-6)  # a constant


def test_conditional_mode_maximises_the_exact_density_over_the_levels(small_series, rng):
    # Reference: scipy.optimize.minimize (BFGS) on the model's own log density
    # with the knots, weekday effects and dispersion held.
    from scipy.optimize import minimize

    model = TrendModel(small_series, ModelSpec(segments=3, family="negbin", jumps=True))
    theta = _states(model, rng, n=2)
    _, _, tau = model.knot_layout(theta)
    phi = model.constrain(theta)["dispersion"]
    mode, chol = conditional_mode(model, tau, offsets(model, theta), phi, steps=25)
    idx = linear_index(model)
    for b in range(theta.shape[0]):
        def neg(v, b=b):
            th = theta[b].copy()
            th[idx] = v
            return -model.log_density(th[None])[0]
        ref = minimize(neg, mode[b], method="BFGS", options={"gtol": 1e-8}).x
        np.testing.assert_allclose(mode[b], ref, atol=2e-4)
        assert neg(mode[b]) <= neg(ref) + 1e-6


def test_design_reproduces_the_models_trend(small_series, rng):
    for spec in (ModelSpec(segments=4), ModelSpec(segments=3, jumps=True), ModelSpec(segments=3, flat_segments=True),
                 ModelSpec(segments=1), ModelSpec(segments=1, flat_segments=True)):
        model = TrendModel(small_series, spec)
        theta = rng.normal(0, 0.5, (5, model.dim))
        _, _, tau = model.knot_layout(theta)
        X = design(model, tau)
        lin = theta[:, linear_index(model)]
        np.testing.assert_allclose(np.einsum("bnp,bp->bn", X, lin), model.log_trend(theta)[:, model.obs_index],
                                   atol=1e-10)


def test_a_move_returns_valid_states_and_exact_densities(small_series, rng):
    model = TrendModel(small_series, ModelSpec(segments=4))
    theta = _states(model, rng, n=8)
    lp = model.log_density(theta)
    binned = Binned.of(model)
    for _ in range(5):
        theta, lp, info = move(rng, model, theta, lp, binned=binned)
        np.testing.assert_allclose(lp, model.log_density(theta), rtol=1e-12)
        assert np.all(np.isfinite(lp)) and info.moved_days.shape == (8,)
