"""A general-purpose gradient-based peer: NumPyro's NUTS on the same posterior.

Optional (the ``bench`` extra: ``pip install -e '.[bench]'``, or
``pip install numpyro jax``); never a runtime dependency of Bendline.

The NumPyro model below is written in the sampler coordinates of
``bendline.inference.model.TrendModel`` (knot-gap logits, log levels at 0,
the knots and n, six free weekday effects, ``log(1/sqrt(phi))``), each an
improper flat site, with the priors and Jacobians added as factors and the
counts observed through NumPyro's own ``NegativeBinomial2`` (or
``Poisson``). Its log density therefore equals Bendline's up to a constant;
:func:`run_peer` checks that at a few points and reports the spread of the
difference.

NUTS (Hoffman & Gelman 2014) with NumPyro's defaults (diagonal mass matrix,
1,000 warm-up iterations, target acceptance 0.8), 4 chains in parallel on 4
host devices (``--xla_force_host_platform_device_count=4``, set before jax is
imported), float64. Starts: the same start search as Bendline and the
random-walk baseline get. After warm-up, draws come in blocks of 250 per
chain; after each block the same criterion is checked with the same
functions (``bendline.inference.snapshots.diagnose`` on
``summaries.reported_quantities``), so "time to criterion" has a granularity
of one block.
"""

from __future__ import annotations

import math
import os
import time

import numpy as np

BLOCK = 250
WARMUP = 1000


def available():
    """True when numpyro and jax can be imported (without importing them)."""
    import importlib.util

    return all(importlib.util.find_spec(m) is not None for m in ("numpyro", "jax"))


def _import_jax(devices=4):
    """Import jax and numpyro with ``devices`` host devices and float64; returns (numpyro, seconds, chain_method)."""
    flags = os.environ.get("XLA_FLAGS", "")
    if "xla_force_host_platform_device_count" not in flags:
        os.environ["XLA_FLAGS"] = f"{flags} --xla_force_host_platform_device_count={devices}".strip()
    t0 = time.perf_counter()
    import jax
    import numpyro

    numpyro.enable_x64()
    seconds = time.perf_counter() - t0
    method = "parallel" if jax.local_device_count() >= devices else "sequential"
    return numpyro, seconds, method


def make_model(model):
    """A NumPyro model whose log density equals ``model.log_density`` up to a constant."""
    import jax.numpy as jnp
    import numpyro
    import numpyro.distributions as dist
    from numpyro.distributions import constraints

    if model.flat or model.jumps or model.knot_centre is not None:
        raise ValueError("the peer model covers continuous trends with uniform change-date priors only")
    from bendline.inference.model_outputs import LOG_C_FLOOR

    K = model.K
    t = jnp.asarray(model.t)
    obs = jnp.asarray(model.obs_index)
    y = jnp.asarray(model.y_obs)
    dow = jnp.asarray(model.dow) if model.weekday else None
    log_compl = jnp.asarray(model.log_completeness)
    m, S = float(model.min_segment), float(model.slack)

    def flat(shape):
        return dist.ImproperUniform(constraints.real, (), shape)

    def trend_model():
        z = numpyro.sample("knot_logit", flat((K - 1,)))
        eta = numpyro.sample("log_level", flat((K + 1,)))
        p = jax_softmax(jnp.concatenate([z, jnp.zeros(1)]))
        gaps = m + S * p
        tau = jnp.cumsum(gaps)[:-1]
        r = jnp.diff(eta) / gaps
        beta = jnp.diff(r)
        # uniform ordered knots: Dirichlet(1, ..., 1) on p, times the additive-logistic Jacobian prod p
        numpyro.factor("knot_prior", jnp.sum(jnp.log(p)))
        numpyro.factor("start_level_prior", dist.Normal(model.level_centre, model.level_sd).log_prob(eta[0]))
        # growth rates Normal(0, s^2), with the Jacobian from rates to levels
        numpyro.factor("rate_prior", jnp.sum(dist.Normal(0.0, model.rate_sd).log_prob(r)) - jnp.sum(jnp.log(gaps)))
        d = t[None, :] - tau[:, None]
        ramp = jnp.clip(d + 1.0, 0.0, 1.0)
        hinge = jnp.maximum(d, 0.0) + 0.5 * ramp * ramp
        logmu = eta[0] + r[0] * (t + 0.5) + beta @ hinge + log_compl
        if model.weekday:
            w = numpyro.sample("weekday_free", flat((6,)))
            w7 = jnp.concatenate([w, -jnp.sum(w, keepdims=True)])
            numpyro.factor("weekday_prior", jnp.sum(dist.Normal(0.0, model.weekday_sd).log_prob(w7)))
            logmu = logmu + w7[dow]
        mu = jnp.exp(logmu[obs])
        if model.negbin:
            log_c = numpyro.sample("log_inv_sqrt_dispersion", flat(()))
            # c = exp(log_c) ~ HalfNormal(scale), plus the Jacobian of log_c -> c
            numpyro.factor("dispersion_prior", dist.HalfNormal(model.c_scale).log_prob(jnp.exp(log_c)) + log_c)
            phi = jnp.exp(-2.0 * jnp.maximum(log_c, LOG_C_FLOOR))
            numpyro.sample("y", dist.NegativeBinomial2(mean=mu, concentration=phi), obs=y)
        else:
            numpyro.sample("y", dist.Poisson(mu), obs=y)

    def jax_softmax(v):
        e = jnp.exp(v - jnp.max(v))
        return e / jnp.sum(e)

    return trend_model


SITES = ("knot_logit", "log_level", "weekday_free", "log_inv_sqrt_dispersion")


def to_sites(model, theta):
    """Bendline's flat theta (dim,) -> the NumPyro sites (dict of arrays)."""
    out = {"knot_logit": theta[model.slices["z"]], "log_level": theta[model.slices["trend"]]}
    if model.weekday:
        out["weekday_free"] = theta[model.slices["weekday"]]
    if model.negbin:
        out["log_inv_sqrt_dispersion"] = theta[model.slices["log_c"]][0]
    return out


def from_sites(model, samples):
    """NumPyro samples grouped by chain -> positions (chains, draws, dim) in Bendline's layout."""
    parts = []
    for name in SITES:
        if name in samples:
            a = np.asarray(samples[name])
            parts.append(a[..., None] if a.ndim == 2 else a)
    return np.concatenate(parts, axis=-1)


def check_density(numpyro_model, model, points):
    """Spread (max - min) of NumPyro's log density minus Bendline's over ``points``, and the mean difference."""
    from numpyro.infer.util import log_density

    ref = model.log_density(points)
    mine = np.array([float(log_density(numpyro_model, (), {}, to_sites(model, x))[0]) for x in points])
    diff = mine - ref
    return float(diff.max() - diff.min()), float(diff.mean())


def run_peer(series, spec, seed=13, budget_seconds=300.0, chains=4):
    """NUTS on the reference posterior until the criterion (or the budget); figures as a dict."""
    numpyro, import_seconds, method = _import_jax(chains)
    import jax
    from numpyro.infer import MCMC, NUTS

    from bendline.inference.init import find_starts
    from bendline.inference.model import TrendModel
    from bendline.inference.snapshots import diagnose
    from bendline.inference.summaries import reported_quantities

    model = TrendModel(series, spec)
    nmodel = make_model(model)
    rng = np.random.default_rng(seed)
    t0 = time.perf_counter()
    modes, _lp, chol = find_starts(model, rng)  # the same starting help as the others
    starts = modes[0] + rng.standard_normal((chains, model.dim)) @ chol.T
    init = {k: np.stack([to_sites(model, x)[k] for x in starts]) for k in to_sites(model, starts[0])}
    mcmc = MCMC(NUTS(nmodel), num_warmup=WARMUP, num_samples=BLOCK, num_chains=chains, chain_method=method,
                progress_bar=False)
    mcmc.warmup(jax.random.PRNGKey(seed), init_params=init, collect_warmup=False)
    warmup_seconds = time.perf_counter() - t0  # includes compiling the warm-up
    mcmc.run(mcmc.post_warmup_state.rng_key, extra_fields=("num_steps", "diverging"))
    first_block_seconds = time.perf_counter() - t0 - warmup_seconds  # includes compiling the sampler
    blocks, steps, divergent, block_seconds = [], 0, 0, [first_block_seconds]
    converged, diag, seconds_to_criterion = False, None, None
    while True:
        samples = mcmc.get_samples(group_by_chain=True)
        extra = mcmc.get_extra_fields(group_by_chain=True)
        steps += int(np.sum(extra["num_steps"]))
        divergent += int(np.sum(extra["diverging"]))
        names, values = reported_quantities(model, from_sites(model, samples))
        blocks.append(values)
        diag = diagnose(names, np.concatenate(blocks, axis=1))
        if diag["converged"]:
            converged, seconds_to_criterion = True, time.perf_counter() - t0
            break
        if time.perf_counter() - t0 > budget_seconds:
            break
        mcmc.post_warmup_state = mcmc.last_state
        tb = time.perf_counter()
        mcmc.run(mcmc.post_warmup_state.rng_key, extra_fields=("num_steps", "diverging"))
        block_seconds.append(time.perf_counter() - tb)
    seconds = time.perf_counter() - t0
    probe = np.random.default_rng(seed + 1000)
    wide = modes[0] + 3.0 * probe.standard_normal((6, model.dim)) @ chol.T
    spread, offset = check_density(nmodel, model, np.concatenate([starts, wide]))
    draws = sum(b.shape[1] for b in blocks)
    ess = min(diag["ess_bulk_min"] or 0.0, diag["ess_tail_min"] or 0.0)
    return {
        "converged": converged, "seconds": seconds, "seconds_to_criterion": seconds_to_criterion,
        "warmup_seconds": warmup_seconds, "block_seconds": block_seconds, "import_seconds": import_seconds, "chain_method": method,
        "devices": jax.local_device_count(), "min_ess": ess, "min_ess_per_s": ess / seconds,
        "rhat_max": diag["rhat_max"], "chains": chains, "draws_per_chain": draws, "warmup": WARMUP,
        "gradients_per_draw": steps / max(chains * draws, 1), "divergent": divergent,
        "density_check_spread": spread, "density_check_offset": offset, "density_points": len(starts) + len(wide),
        "numpyro": numpyro.__version__, "jax": jax.__version__, "x64": bool(jax.config.jax_enable_x64),
        "budget_seconds": budget_seconds if not converged else None,
        "ess_per_gradient": ess / max(steps, 1) if math.isfinite(ess) else None,
    }
