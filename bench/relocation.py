"""Relocation-move benchmark: how far the change dates jump per millisecond of the move.

The relocation move (bendline/inference/relocate.py) is exact for any
lattice size, bin count and number of scoring steps of its conditional mode;
these only trade cost against how far a move carries the change dates. This script
fits ``daily_admissions.csv`` with K = 4 once (a spare change date, separated
modes), then runs the move from posterior draws under each setting and
prints, per setting: milliseconds per move (8 chains), the mean squared jump
of the change dates per move (days^2), the share of chains whose moved date
went further than a tenth of the series, and the squared jump per
millisecond (the figure the settings were chosen by).

Moves start from posterior draws each time, so the figures describe the
move at stationarity; the same random stream is used for every setting.

Usage:  python bench/relocation.py [--moves N] [--seed S]
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from cases import HARD_CASES  # noqa: E402

#: (bins, scoring steps, lattice points across a change date's range). The
#: local windows the move used before 2026-12-03 (16 points around the current
#: position: 100 days^2/ms in that day's run, against 282-318 for 6 to 12
#: points across the range) are no longer in the code.
SETTINGS = [(64, 2, 10), (32, 1, 6), (32, 1, 8), (32, 1, 10), (32, 1, 12), (32, 1, 16), (32, 1, 24)]


def posterior_draws(seed):
    from bendline.inference.driver import run
    from bendline.inference.model import TrendModel
    from bendline.inference.sinks import MemorySink
    from bendline.inference.spec import spec_from_options

    build, options = HARD_CASES["daily_admissions, K=4"]
    spec, settings = spec_from_options(dict(options, seed=seed, snapshot_summaries=False, draws=1000,
                                            max_draws=1000))
    model = TrendModel(build(), spec)
    sink = MemorySink()
    for _ in run(model, settings, sink=sink):
        pass
    positions, _ = sink.read()
    return model, positions.reshape(-1, model.dim)


def measure(model, draws, bins, steps, points, moves, seed, chains=8):
    import bendline.inference.relocate as rel
    from bendline.inference.conditional import Binned

    binned = Binned.of(model, max_bins=bins)
    old = rel.SCORING_STEPS, rel.RANGE_POINTS
    rel.SCORING_STEPS, rel.RANGE_POINTS = steps, points
    try:
        rng = np.random.default_rng(seed)
        seconds, jump, far = 0.0, 0.0, 0
        limit = 0.1 * model.n * model.interval_days
        for _ in range(moves):
            theta = draws[rng.integers(0, draws.shape[0], chains)]
            lp = model.log_density(theta)
            t0 = time.perf_counter()
            new, _, info = rel.move(rng, model, theta, lp, binned=binned)
            seconds += time.perf_counter() - t0
            _, _, before = model.knot_layout(theta)
            _, _, after = model.knot_layout(new)
            jump += float((((after - before) * model.interval_days) ** 2).sum()) / chains
            far += int((info.moved_days > limit).sum())
    finally:
        rel.SCORING_STEPS, rel.RANGE_POINTS = old
    ms = 1000.0 * seconds / moves
    return ms, jump / moves, far / (moves * chains)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--moves", type=int, default=300, help="moves per setting")
    ap.add_argument("--seed", type=int, default=3, help="seed of the fit that gives the posterior draws")
    args = ap.parse_args()
    load = os.getloadavg()
    model, draws = posterior_draws(args.seed)
    print(f"Relocation move on daily_admissions.csv, K = 4: {args.moves} moves of 8 chains from "
          f"{draws.shape[0]} posterior draws per setting; load average {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f}")
    for bins, steps, points in SETTINGS:
        ms, jump, far = measure(model, draws, bins, steps, points, args.moves, seed=1)
        print(f"  {bins:2d} bins, {steps} scoring step(s), {points:2d} lattice points: {ms:5.2f} ms/move, "
              f"squared jump {jump:6.1f} day^2/move, far moves {far:.3f}, squared jump per ms {jump / ms:6.1f}")


if __name__ == "__main__":
    main()
