"""The HMC kernel and its adaptation, on stub and Gaussian targets."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from bendline.inference import diagnostics
from bendline.inference.driver import warmup_schedule
from bendline.inference.hmc import (
    ChEES,
    DualAveraging,
    Params,
    Target,
    covariance_chol,
    init_state,
    step,
)


def test_a_proposal_with_minus_infinity_density_is_always_rejected(rng):
    start = np.zeros((5, 3))

    def lp(x):
        return np.where(np.all(x == 0, axis=1), 0.0, -np.inf)

    target = Target(lp, lambda x: np.zeros_like(x))
    state = init_state(target, start)
    new, info = step(rng, state, target, Params(0.5, 3, np.eye(3)))
    assert not info.accepted.any()
    assert np.all(info.accept_prob == 0.0)
    np.testing.assert_array_equal(new.position, start)
    assert new is not state and state.position is start  # the caller's state is untouched


def test_a_flat_target_always_accepts_and_moves_along_the_momentum(rng):
    target = Target(lambda x: np.zeros(x.shape[0]), lambda x: np.zeros_like(x))
    L = np.array([[2.0, 0.0], [0.5, 1.0]])
    state = init_state(target, np.ones((4, 2)))
    twin = copy.deepcopy(rng)
    new, info = step(rng, state, target, Params(0.1, 7, L))
    p0 = twin.standard_normal((4, 2))
    assert info.accepted.all()
    np.testing.assert_allclose(info.accept_prob, 1.0)
    np.testing.assert_allclose(new.position, 1.0 + 0.1 * 7 * p0 @ L.T)


def _gaussian(cov):
    prec = np.linalg.inv(cov)

    def lp(x):
        return -0.5 * np.einsum("bi,ij,bj->b", x, prec, x)

    return Target(lp, lambda x: -x @ prec)


def test_energy_error_shrinks_with_the_square_of_the_step(rng):
    target = _gaussian(np.eye(4))
    state = init_state(target, rng.standard_normal((200, 4)))
    errs = []
    for eps in (0.2, 0.1):
        _, info = step(copy.deepcopy(rng), state, target, Params(eps, int(round(1.0 / eps)), np.eye(4)))
        errs.append(np.mean(1 - info.accept_prob))
    # leapfrog's energy error is O(eps^2) (Neal 2011, sec. 5.2.3.3): halving the step quarters it
    assert errs[1] < errs[0] / 2.5


def test_samples_a_correlated_gaussian_correctly(rng):
    cov = np.array([[1.0, 0.8], [0.8, 2.0]])
    target = _gaussian(cov)
    L = np.linalg.cholesky(cov)
    state = init_state(target, rng.standard_normal((8, 2)) @ L.T)
    draws = []
    for i in range(1500):
        n = int(np.ceil((1 - rng.random()) * 1.5 / 0.4))
        state, _ = step(rng, state, target, Params(0.4, n, L))
        draws.append(state.position)
    x = np.array(draws).transpose(1, 0, 2)  # (chains, draws, 2)
    ess = diagnostics.ess_bulk(x)
    mean = x.reshape(-1, 2).mean(axis=0)
    se = np.sqrt(np.diag(cov) / ess)
    assert np.all(np.abs(mean) < 4 * se)
    emp = np.cov(x.reshape(-1, 2), rowvar=False)
    np.testing.assert_allclose(emp, cov, atol=0.15)
    assert np.max(diagnostics.rhat(x)) < 1.01


def test_dual_averaging_reaches_the_target_acceptance(rng):
    target = _gaussian(np.diag([1.0, 4.0, 0.25]))
    state = init_state(target, rng.standard_normal((16, 3)))
    da = DualAveraging(2.0, target=0.8)
    eps = 2.0
    for _ in range(400):
        state, info = step(rng, state, target, Params(eps, 5, np.eye(3)))
        eps = da.update(info.accept_prob)
    eps = da.final()
    acc = []
    for _ in range(300):
        state, info = step(rng, state, target, Params(eps, 5, np.eye(3)))
        acc.append(info.accept_prob.mean())
    assert np.mean(acc) == pytest.approx(0.8, abs=0.07)


def test_chees_lengthens_a_too_short_trajectory(rng):
    target = _gaussian(np.eye(3))
    state = init_state(target, rng.standard_normal((32, 3)))
    chees = ChEES(trajectory_length=0.05, max_length=20.0)
    eps = 0.05
    for _ in range(300):
        u = 1 - rng.random()
        n = max(1, int(np.ceil(u * chees.length / eps)))
        old = state.position
        state, info = step(rng, state, target, Params(eps, n, np.eye(3)))
        chees.update(old, info.proposal, info.end_momentum, info.accept_prob, u)
    # For a standard normal the criterion peaks near half a period (pi/2 or more
    # with jitter); starting from 0.05 it must have grown well past 0.5.
    assert chees.length > 0.5


def test_warmup_schedule_covers_every_iteration():
    for n in (20, 57, 150, 300, 1000):
        plan = warmup_schedule(n)
        assert sum(k for _, k in plan) == n
        assert plan[0][0] == "fast" and plan[-1][0] == "fast"
        assert any(kind == "slow" for kind, _ in plan)


def test_covariance_factor_recovers_a_known_covariance(rng):
    cov = np.array([[2.0, 0.3, 0.0], [0.3, 1.0, -0.4], [0.0, -0.4, 0.5]])
    x = rng.multivariate_normal(np.zeros(3), cov, size=20000)
    L = covariance_chol(x)
    np.testing.assert_allclose(L @ L.T, cov, atol=0.05)
    # a rank-deficient sample still gives a valid factor
    L2 = covariance_chol(np.repeat(x[:, :1], 3, axis=1))
    assert np.all(np.isfinite(L2)) and np.all(np.diag(L2) > 0)
