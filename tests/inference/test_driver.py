"""The sampling run: snapshots, stopping, reproducibility, stuck chains."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest

from bendline.inference import SCHEMA_VERSION
from bendline.inference.driver import _stuck_chains, run
from bendline.inference.model import TrendModel
from bendline.inference.sinks import MemorySink
from bendline.inference.spec import ModelSpec, RunSettings

SPEC = ModelSpec(segments=3, family="negbin")


def _drain(series, settings, **kw):
    sink = MemorySink()
    snaps = list(run(TrendModel(series, SPEC), settings, sink=sink, **kw))
    return snaps, sink


def test_every_snapshot_is_json_safe_and_versioned(small_series):
    snaps, sink = _drain(small_series, RunSettings(chains=4, draws=50, max_draws=100, seed=3, snapshot_every=20, warmup=60, snapshot_seconds=0))
    phases = [s["phase"] for s in snaps]
    assert phases[0] == "init" and phases[-1] == "done"
    assert "warmup" in phases and "sampling" in phases
    for s in snaps:
        text = json.dumps(s, allow_nan=False)
        assert json.loads(text) == s
        assert s["schema_version"] == SCHEMA_VERSION
    last = snaps[-1]
    assert last["status"] in ("converged", "unconverged")
    assert last["draws_per_chain"] == sink.draws
    sampling = [s for s in snaps if s["phase"] == "sampling"]
    for key in ("band", "segments", "changepoints", "changepoint_histograms", "diagnostics", "traces"):
        assert key in sampling[0], key
    assert len(sampling[0]["band"]["trend_q50"]) == small_series.n
    # snapshots stay small: summaries, not draws
    assert len(json.dumps(sampling[-1])) < 200_000


def test_same_seed_gives_the_same_draws_whatever_the_snapshot_rate(small_series):
    a = RunSettings(chains=4, draws=60, max_draws=60, seed=11, snapshot_every=10, warmup=60)
    b = RunSettings(chains=4, draws=60, max_draws=60, seed=11, snapshot_every=30, warmup=60, snapshot_seconds=0)
    _, sa = _drain(small_series, a)
    _, sb = _drain(small_series, b)
    pa, _ = sa.read()
    pb, _ = sb.read()
    n = min(pa.shape[1], pb.shape[1])
    assert n == 60
    np.testing.assert_array_equal(pa[:, :n], pb[:, :n])
    _, sc = _drain(small_series, RunSettings(chains=4, draws=60, max_draws=60, seed=12, snapshot_every=10, warmup=60))
    assert not np.array_equal(sc.read()[0][:, :10], pa[:, :10])


def test_thinning_keeps_every_kth_iteration_of_the_same_chain(small_series):
    # The same seed walks the same chain; thin=3 keeps iterations 3, 6, 9, ...
    # of the unthinned run, and does three times the work per kept draw.
    calls = itertools.count()
    full = RunSettings(chains=4, draws=30, max_draws=30, seed=7, snapshot_every=10, warmup=40)
    thin = RunSettings(chains=4, draws=10, max_draws=10, seed=7, snapshot_every=10, warmup=40, thin=3)
    _, s_full = _drain(small_series, full)
    snaps, s_thin = _drain(small_series, thin, should_stop=lambda: next(calls) < 0)
    np.testing.assert_array_equal(s_thin.read()[0], s_full.read()[0][:, 2::3])
    assert next(calls) == 40 + 30  # one stop check per iteration: warm-up, then 3 per kept draw
    assert snaps[-1]["draws_per_chain"] == 10


def test_stop_request_ends_the_run_and_keeps_the_draws(small_series):
    calls = itertools.count()
    settings = RunSettings(chains=4, draws=500, seed=3, snapshot_every=10, warmup=40)
    snaps, sink = _drain(small_series, settings, should_stop=lambda: next(calls) >= 40 + 24)  # 40 warm-up calls, then 25 draws
    assert snaps[-1]["status"] == "stopped"
    assert sink.draws == 25
    assert snaps[-1]["band"] is not None


def test_stop_during_warmup_ends_with_no_draws(small_series):
    calls = itertools.count()
    settings = RunSettings(chains=4, draws=500, seed=3, snapshot_every=10, warmup=60)
    snaps, sink = _drain(small_series, settings, should_stop=lambda: next(calls) >= 5)
    assert snaps[-1]["status"] == "stopped"
    assert sink.draws == 0


def test_time_budget_ends_an_unconverged_run(small_series):
    ticks = itertools.count()
    clock = lambda: next(ticks) * 0.01  # every call costs a fake 10 ms
    settings = RunSettings(chains=4, draws=100000, seed=3, snapshot_every=10, warmup=40, max_seconds=3.0)
    snaps, sink = _drain(small_series, settings, clock=clock)
    assert snaps[-1]["status"] == "unconverged" and snaps[-1]["ended_by"] == "time budget"
    assert snaps[-1]["diagnostics"]["converged"] in (True, False)
    assert sink.draws > 0


def test_the_time_budget_counts_the_start_search_and_warm_up(small_series):
    # a wall budget: a fit whose start search alone uses it up ends there, with no draws
    ticks = itertools.count()
    clock = lambda: float(next(ticks))  # every call costs a fake second
    settings = RunSettings(chains=4, draws=100, seed=3, warmup=40, max_seconds=1.0)
    snaps, sink = _drain(small_series, settings, clock=clock)
    final = snaps[-1]
    assert final["status"] == "unconverged" and final["ended_by"] == "time budget"
    assert sink.draws == 0 and "init_seconds" in final["timings"] and "warmup_seconds" not in final["timings"]


def test_stuck_chains_are_found_and_a_majority_never_dropped():
    lp = np.random.default_rng(0).normal(-100, 3, (50, 8))
    lp[:, 2] -= 150  # a trap mode far below
    assert list(np.flatnonzero(_stuck_chains(lp))) == [2]
    lp[:, 2] += 150
    lp[:, 3:] -= 150
    assert not _stuck_chains(lp).any()  # five of eight below the rest: a disagreement, not a trap
    ok = np.random.default_rng(1).normal(-100, 3, (50, 8))
    assert not _stuck_chains(ok).any()


def test_in_warmup_chains_far_below_the_best_are_restarted_even_a_majority():
    # Warm-up only restarts a chain from a good one, so a majority that
    # started poorly (seen on daily_admissions.csv with K = 4: six of eight
    # chains hundreds of log-units down) is brought back; chains close to the
    # best are left alone.
    lp = np.random.default_rng(2).normal(-100, 3, (50, 8))
    lp[:, 3:] -= 150
    assert list(np.flatnonzero(_stuck_chains(lp, against="best"))) == [3, 4, 5, 6, 7]
    ok = np.random.default_rng(3).normal(-100, 3, (50, 8))
    assert not _stuck_chains(ok, against="best").any()
    climbing = ok.copy()
    climbing[:, 0] = np.linspace(-400, -100, 50)  # a chain still climbing: wide, far below on average
    assert list(np.flatnonzero(_stuck_chains(climbing, against="best"))) == [0]


def test_starts_stay_near_their_mode_where_the_laplace_spread_is_flat(small_series):
    # A flat direction of the Laplace factor (here: every coordinate scaled
    # by 50) would throw starts far down; each start's jitter is halved
    # until it is within the gap of its mode.
    from types import SimpleNamespace

    from bendline.inference.model import TrendModel
    from bendline.inference.spec import ModelSpec

    import bendline.inference.driver as drv

    model = TrendModel(small_series, ModelSpec(segments=2))
    modes, lp, chol = drv.find_starts(model, np.random.default_rng(0))
    base = np.repeat(modes[:1], 8, axis=0)
    ctx = SimpleNamespace(model=model, rng_init=np.random.default_rng(1))
    starts = drv._spread_starts(ctx, base, np.repeat(lp[:1], 8), chol * 50.0)
    start_lp = model.log_density(starts)
    assert np.all(start_lp >= lp[0] - max(drv.STUCK_GAP, model.dim))
    assert np.ptp(starts, axis=0).max() > 0  # still spread, not all at the mode


def test_a_chain_found_stuck_after_warmup_is_dropped_and_reported(small_series, monkeypatch):
    # The detection itself is tested above; here the run's wiring: a chain
    # flagged after warm-up leaves the run, the sink and the counts, and the
    # final snapshot names it.
    import bendline.inference.driver as drv

    real = drv._stuck_chains
    calls = {"n": 0}

    def flag_chain_0_after_warmup(lp_window, against="median"):
        calls["n"] += 1
        out = real(lp_window, against)
        if lp_window.shape[0] == 6:  # the final fast window of the plan below
            out = out.copy()
            out[0] = True
        return out

    monkeypatch.setattr(drv, "_stuck_chains", flag_chain_0_after_warmup)
    monkeypatch.setattr(drv, "warmup_schedule", lambda n: [("fast", 10), ("slow", n - 16), ("fast", 6)])
    settings = RunSettings(chains=6, draws=60, seed=5, snapshot_every=20, warmup=60)
    snaps, sink = _drain(small_series, settings)
    final = snaps[-1]
    assert final["sampler"]["chains_dropped"] == [0]
    assert final["chains"] == 5
    assert sink.read()[0].shape[0] == 5
    assert calls["n"] == 2  # once at the slow window's end, once after warm-up


def test_the_start_preconditioner_caps_flat_directions():
    # daily_admissions.csv with K = 4 has a spare change date nearly flat at
    # the mode; its Laplace variance was in the thousands (threw starts far
    # off, shrank the first step size a thousandfold). No direction may now
    # exceed the cap, and the directions the data pin down keep their scale.
    import os

    from bendline.inference.init import find_starts
    from bendline.inference.model import TrendModel
    from bendline.inference.reader import read_series
    from bendline.inference.spec import ModelSpec

    path = os.path.join(os.path.dirname(__file__), "..", "..", "sample_series", "daily_admissions.csv")
    model = TrendModel(read_series(path), ModelSpec(segments=4))
    # the start-search stream of a run with seed 2 (as driver.run makes it): uncapped, a variance of 204
    _, _, chol = find_starts(model, np.random.default_rng(np.random.SeedSequence(2).spawn(3)[1]))
    var = np.linalg.eigvalsh(chol @ chol.T)
    assert var.max() <= 4.0 * (1 + 1e-9)  # init.MAX_START_VARIANCE: sd 2 at most
    assert var.min() < 1e-2  # the weekday effects and levels are tightly pinned, not flattened to the cap


def test_one_stray_far_move_does_not_make_sampling_relocate_every_iteration():
    # Seed 12 of the reference problem (one mode) saw 1 far move in 96 late
    # warm-up relocations, just over 1%, and relocated every iteration (five
    # times the run's time); separated modes give many more (measured: 12-47
    # of about 200 on daily_admissions.csv with K = 4 and 6 and boot::coal).
    import bendline.inference.schedule as sch

    assert sch.relocate_every(1, 96) == sch.RELOCATE_UNIMODAL
    assert sch.relocate_every(0, 0) == sch.RELOCATE_UNIMODAL
    assert sch.relocate_every(12, 96) == sch.RELOCATE_MULTIMODAL
    assert sch.relocate_every(5, 1000) == sch.RELOCATE_UNIMODAL  # many moves, a tiny share


def test_divergences_in_sampling_shrink_the_step_and_the_draws_start_over(small_series, monkeypatch):
    # Divergences are made frequent by lowering the energy error that marks
    # one; sampling must shrink the step (at most MAX_STEP_SHRINKS times),
    # discard what it drew with the larger one (those draws count as
    # warm-up) and keep only draws of the final kernel. The trigger is the
    # verdict's tolerated share (inference.verdict.DIVERGENCE_SHARE).
    import bendline.inference.driver as drv
    import bendline.inference.hmc as hmc

    monkeypatch.setattr(hmc, "DIVERGENCE_THRESHOLD", 0.05)
    settings = RunSettings(chains=4, draws=40, max_draws=40, seed=5, snapshot_every=20, warmup=80,
                           snapshot_seconds=0, snapshot_summaries=False)
    snaps, sink = _drain(small_series, settings)
    last = snaps[-1]["sampler"]
    assert last["step_size_reductions"] == drv.MAX_STEP_SHRINKS
    assert last["draws_discarded_after_divergences"] >= 20 * drv.MAX_STEP_SHRINKS
    assert snaps[-1]["draws_per_chain"] == sink.draws == 40  # only the final kernel's draws are kept
    assert snaps[-1]["warmup_iterations"] == 80 + last["draws_discarded_after_divergences"]
    # the same run (same warm-up, same tuned step) without the mechanism
    monkeypatch.setattr(drv, "MAX_STEP_SHRINKS", 0)
    before = _drain(small_series, settings)[0][-1]["sampler"]
    assert before["step_size_reductions"] == 0 and before["draws_discarded_after_divergences"] == 0
    assert last["step_size"] == pytest.approx(before["step_size"] * drv.STEP_SHRINK ** 2, rel=1e-5)


def test_a_few_divergences_within_the_tolerated_share_do_not_shrink_the_step():
    from bendline.inference.schedule import too_many_divergences
    from bendline.inference.verdict import DIVERGENCE_SHARE

    assert not too_many_divergences(1, 400)  # a single one never does
    assert not too_many_divergences(3, int(3 / DIVERGENCE_SHARE))
    assert too_many_divergences(3, int(3 / DIVERGENCE_SHARE) - 1)


def test_warm_up_ends_with_the_covariance_metric_on_one_mode_and_the_scores_on_separated_modes(
        small_series, monkeypatch):
    # Which slow-window metric is used follows the far moves relocations have
    # made so far (inference.schedule.metric_kind). The series has clear
    # change dates (one mode); the second run counts every relocation as a
    # far move, as on a posterior with separated modes.
    import bendline.inference.driver as drv
    import bendline.inference.schedule as sch
    from bendline.inference.snapshots import Progress

    calls = []
    for name in ("covariance_chol", "fisher_chol"):
        real = getattr(drv, name)
        monkeypatch.setattr(drv, name, lambda x, _real=real, _name=name: calls.append(_name) or _real(x))
    settings = RunSettings(chains=4, draws=40, max_draws=40, seed=3, snapshot_every=20, warmup=80,
                           snapshot_seconds=0, snapshot_summaries=False)
    one = _drain(small_series, settings)[0][-1]["sampler"]
    assert one["far_relocation_rate"] == 0 and one["metric"] == "covariance"
    assert calls and set(calls) == {"covariance_chol"}

    def all_far(self, info):
        self.relocations += 1
        self.relocated += info.moved_days.size
        self.relocation_slots += info.moved_days.size

    calls.clear()
    monkeypatch.setattr(Progress, "record_relocation", all_far)
    many = _drain(small_series, settings)[0][-1]["sampler"]
    assert many["metric"] == "fisher" and set(calls) == {"fisher_chol"}
    assert sch.metric_kind(3, 96) == "covariance"  # fewer far moves than FAR_MOVES_MIN
    assert sch.metric_kind(sch.FAR_MOVES_MIN, 96) == "fisher"


def test_a_timed_snapshot_right_after_a_step_shrink_waits_for_draws(small_series, monkeypatch):
    # After a shrink the draws start over; a snapshot due by the clock at that
    # moment must not summarise an empty set of draws (it crashed the run).
    # A clock that moves a second per reading makes every snapshot due.
    import itertools

    import bendline.inference.hmc as hmc

    monkeypatch.setattr(hmc, "DIVERGENCE_THRESHOLD", 0.05)
    ticks = itertools.count()
    settings = RunSettings(chains=4, draws=40, max_draws=40, seed=5, snapshot_every=20, warmup=80,
                           snapshot_seconds=0.3, max_seconds=86400.0)
    snaps, sink = _drain(small_series, settings, clock=lambda: float(next(ticks)))
    assert snaps[-1]["sampler"]["step_size_reductions"] >= 1
    assert snaps[-1]["phase"] == "done" and sink.draws == 40
    assert all(s["draws_per_chain"] > 0 for s in snaps if s["phase"] == "sampling")
