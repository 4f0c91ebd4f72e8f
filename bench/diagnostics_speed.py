"""Time :func:`inference.diagnostics.summarize` on a typical mid-run batch.

30 parameters x 16 chains x 2000 draws of AR(1) noise (phi = 0.9), seeded.
Prints wall-clock seconds for one ``summarize`` call (best of 3) and for the
individual diagnostics. Not a test: run it by hand,

    PYTHONPATH=. python bench/diagnostics_speed.py [chains] [draws] [params]
"""

from __future__ import annotations

import sys
import time

import numpy as np

from bendline.inference import diagnostics as dg


def ar1(rng, chains, draws, params, phi=0.9):
    """AR(1) draws shaped (chains, draws, params)."""
    e = rng.normal(size=(chains, draws, params))
    x = np.empty_like(e)
    x[:, 0] = e[:, 0] / np.sqrt(1 - phi**2)
    for t in range(1, draws):
        x[:, t] = phi * x[:, t - 1] + e[:, t]
    return x


def best_of(fn, repeat=3):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main(argv):
    chains, draws, params = (int(v) for v in (argv + ["16", "2000", "30"][len(argv):]))
    rng = np.random.default_rng(20240601)
    x = ar1(rng, chains, draws, params)
    print(f"{params} params x {chains} chains x {draws} draws")
    print(f"summarize     {best_of(lambda: dg.summarize(x)):.3f} s")
    for name in ("rhat", "ess_bulk", "ess_tail", "ess_mean", "mcse_mean"):
        fn = getattr(dg, name)
        print(f"{name:<13} {best_of(lambda: fn(x)):.3f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
