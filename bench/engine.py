"""Engine benchmark: time to convergence, min-ESS per second, peak memory.

Prints, from one run on this machine:

* the reference problem (365 invented daily values, K = 4, negative binomial,
  weekday effect, fixed seed): seconds from start to the convergence
  criterion (max R-hat < 1.01, min bulk and tail ESS >= 400), min-ESS per
  second, peak memory;
* the same for a textbook random-walk Metropolis baseline (4 chains,
  diagonal Gaussian proposal tuned on pilot runs to the 2.38^2 / d scaling of
  Roberts, Gelman & Gilks 1997) on the same posterior, and the ratio;
* a 10-year daily series with K = 8.

* real hard cases (bench/cases.py): coal-mining disasters with a continuous
  trend and jumps and as level shifts, daily_admissions.csv with K = 4 and
  K = 6, the 1854 cholera outbreak; and forty invented regions through
  ``bendline batch``.

Each case runs in its own process so peak memory (max RSS) is its own.
Targets (2 cores): converged <= 3 s, >= 1000 min-ESS/s, >= 5x the baseline,
peak memory <= 300 MB, 10-year K = 8 converged <= 30 s.

Usage:  python bench/engine.py [--repeats N] [--blocks reference,hard,regions]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import statistics
import subprocess
import sys
import time

import numpy as np

BASELINE_BUDGET = 300.0  # seconds; a baseline still unconverged then gives a lower bound on the ratio
ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


from cases import HARD_CASES, reference_problem, ten_year_problem, write_regions  # noqa: E402


def run_bendline(which, seed=11):
    from bendline.inference.driver import run
    from bendline.inference.model import TrendModel
    from bendline.inference.spec import ModelSpec, RunSettings

    series, K = reference_problem() if which == "reference" else ten_year_problem()
    spec = ModelSpec(segments=K, family="negbin", weekday=True)
    # as 'bendline fit' runs: default chains and draws, snapshots with counters only
    settings = RunSettings(seed=seed, max_seconds=300, snapshot_summaries=False)
    t0 = time.perf_counter()
    final = None
    for snap in run(TrendModel(series, spec), settings):
        final = snap
    seconds = time.perf_counter() - t0
    d = final["diagnostics"]
    ess = min(d["ess_bulk_min"], d["ess_tail_min"])
    return {
        "converged": d["converged"],
        "seconds": seconds,
        "min_ess": ess,
        "min_ess_per_s": ess / seconds,
        "rhat_max": d["rhat_max"],
        "chains": final["chains"],
        "draws_per_chain": final["draws_per_chain"],
        "timings": final["timings"],
    }


def run_baseline(seed=12):
    """Random-walk Metropolis, 4 chains, pilot-tuned diagonal proposal."""
    from bendline.inference import diagnostics
    from bendline.inference.init import find_starts
    from bendline.inference.model import TrendModel
    from bendline.inference.spec import ModelSpec
    from bendline.inference.summaries import reported_quantities

    series, K = reference_problem()
    model = TrendModel(series, ModelSpec(segments=K, family="negbin", weekday=True))
    rng = np.random.default_rng(seed)
    t0 = time.perf_counter()
    modes, lp0, chol = find_starts(model, rng)  # same starting help as ours, for fairness
    C, D = 4, model.dim
    x = modes[0] + rng.standard_normal((C, D)) @ chol.T
    lp = model.log_density(x)
    scale = np.sqrt(np.diag(chol @ chol.T)) * 2.38 / math.sqrt(D)

    def sweep(x, lp, scale, n, keep):
        out = np.empty((C, n, D)) if keep else None
        acc = 0.0
        for i in range(n):
            prop = x + rng.standard_normal((C, D)) * scale
            lpp = model.log_density(prop)
            a = np.log(rng.random(C)) < lpp - lp
            x = np.where(a[:, None], prop, x)
            lp = np.where(a, lpp, lp)
            acc += a.mean()
            if keep:
                out[:, i] = x
        return x, lp, acc / n, out

    # Pilot tuning: proposal sd from the pilot's marginal sd, and a global
    # factor adjusted toward the 0.234 acceptance rate of Roberts, Gelman &
    # Gilks (1997).
    factor = 1.0
    for _ in range(5):
        x, lp, acc, pilot = sweep(x, lp, scale * factor, 2000, True)
        sd = pilot.reshape(-1, D).std(axis=0)
        scale = np.maximum(sd, 1e-6) * 2.38 / math.sqrt(D)
        factor *= math.exp(acc - 0.234) if acc > 0.234 else max(0.5, acc / 0.234)
    scale = scale * factor
    draws = []
    converged = False
    ess = 0.0
    thin = 10  # keep every 10th draw (storage); ESS is estimated on what is kept
    while time.perf_counter() - t0 < BASELINE_BUDGET:
        x, lp, acc, block = sweep(x, lp, scale, 5000, True)
        draws.append(block[:, ::thin])
        pos = np.concatenate(draws, axis=1)
        names, values = reported_quantities(model, pos)
        v = np.moveaxis(values, 2, 0)
        rh = max(diagnostics.rhat(vi) for vi in v)
        eb = min(diagnostics.ess_bulk(vi) for vi in v)
        et = min(diagnostics.ess_tail(vi) for vi in v)
        ess = min(eb, et)
        if rh < 1.01 and ess >= 400:
            converged = True
            break
    seconds = time.perf_counter() - t0
    return {
        "converged": converged, "seconds": seconds, "min_ess": ess,
        "min_ess_per_s": ess / seconds, "chains": C, "draws_per_chain": pos.shape[1] * thin,
        "accept": acc,
    }


def run_throughput(seed=11):
    """Sampler throughput: 32 chains, 1000 draws each after warm-up, min-ESS per second of sampling."""
    from bendline.inference.driver import run
    from bendline.inference.spec import ModelSpec, RunSettings

    series, K = reference_problem()
    spec = ModelSpec(segments=K, family="negbin", weekday=True)
    settings = RunSettings(seed=seed, chains=32, draws=1000, max_draws=1000, snapshot_summaries=False,
                           snapshot_every=1000)
    t0 = time.perf_counter()
    for snap in run(TrendModel(series, spec), settings):
        final = snap
    seconds = time.perf_counter() - t0
    d = final["diagnostics"]
    ess = min(d["ess_bulk_min"], d["ess_tail_min"])
    sampling = final["timings"]["sampling_seconds"]
    return {"converged": d["converged"], "seconds": seconds, "min_ess": ess, "min_ess_per_s": ess / sampling,
            "chains": final["chains"], "draws_per_chain": final["draws_per_chain"], "timings": final["timings"]}


def run_hard(name, seed=1):
    """One real hard case, as `bendline fit` runs it (default settings, the series' defaults)."""
    from bendline.inference.fitting import fit_result

    build, options = HARD_CASES[name]
    series = build()
    t0 = time.perf_counter()
    result, final = fit_result(series, dict(options, seed=seed, snapshot_summaries=False))
    seconds = time.perf_counter() - t0
    d = result["diagnostics"]
    ess = min(d["ess_bulk_min"] or 0.0, d["ess_tail_min"] or 0.0)
    engine = final["timings"]["total_seconds"]
    return {"converged": d["converged"], "reportable": d["reportable"], "seconds": seconds,
            "engine_seconds": engine, "min_ess": ess, "min_ess_per_s": ess / engine, "rhat_max": d["rhat_max"],
            "chains": d["chains"], "draws_per_chain": d["draws_per_chain"],
            "far_relocations": final["sampler"].get("far_relocation_rate"),
            "warnings": sorted({w["kind"] for w in d["warnings"]})}


def run_regions(workers=2):
    """40 invented regions through `bendline batch` in one process tree: converged and reportable counts, wall."""
    import csv
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "regions.csv")
        write_regions(path)
        out = os.path.join(tmp, "fits")
        t0 = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "bendline.app.cli", "batch", path, "--by", "region", "--out-dir", out,
                               "--workers", str(workers), "--quiet"], cwd=ROOT, capture_output=True, text=True)
        seconds = time.perf_counter() - t0
        with open(os.path.join(out, "summary.csv"), encoding="utf-8-sig") as fh:
            rows = list(csv.DictReader(fh))
    return {"regions": len(rows), "converged": sum(r["converged"] == "true" for r in rows),
            "reportable": sum(r["reportable"] == "true" for r in rows), "seconds": seconds,
            "exit": proc.returncode,
            "not_reportable": [(r["region"], r["message"][:120]) for r in rows if r["reportable"] != "true"]}


def child(which, seed):
    if which == "baseline":
        res = run_baseline(seed)
    elif which == "throughput":
        res = run_throughput(seed)
    elif which.startswith("hard:"):
        res = run_hard(which[5:], seed)
    elif which == "regions":
        res = run_regions()
    else:
        res = run_bendline(which, seed)
    res["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(json.dumps(res))


def spawn(which, seed):
    out = subprocess.run(
        [sys.executable, __file__, "--child", which, "--seed", str(seed)], capture_output=True, text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def hard_block(repeats):
    """Real hard cases, each in its own process, medians over seeds."""
    print(f"Hard cases (real series; each fit as `bendline fit` runs it; {repeats} seeds, medians)")
    for name in HARD_CASES:
        runs = [spawn(f"hard:{name}", seed) for seed in range(1, repeats + 1)]
        conv = sum(r["converged"] for r in runs)
        rep = sum(r["reportable"] for r in runs)
        med = lambda key: statistics.median(r[key] for r in runs)  # noqa: E731
        each = ", ".join(f"{r['engine_seconds']:.1f}" for r in runs)
        print(f"  {name}: converged {conv}/{len(runs)}, reportable {rep}/{len(runs)}; engine seconds "
              f"{med('engine_seconds'):.2f} (runs {each}); "
              f"process {med('seconds'):.2f} s; min-ESS/s {med('min_ess_per_s'):.0f}; "
              f"draws/chain {med('draws_per_chain'):.0f}; far relocations {runs[0]['far_relocations']}; "
              f"warnings {sorted({w for r in runs for w in r['warnings']})}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--child")
    ap.add_argument("--seed", type=int, default=11)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--skip-ten-year", action="store_true")
    ap.add_argument("--blocks", default="reference,hard,regions",
                    help="comma-separated: reference (with baseline and throughput), hard, regions")
    args = ap.parse_args()
    if args.child:
        child(args.child, args.seed)
        return
    blocks = set(args.blocks.split(","))
    if "hard" in blocks:
        hard_block(args.repeats)
    if "regions" in blocks:
        r = spawn("regions", 0)
        print(f"Forty invented regions (365 d, K=3, negbin, weekday) through `bendline batch --workers 2`: "
              f"{r['converged']}/{r['regions']} converged, {r['reportable']}/{r['regions']} reportable, "
              f"{r['seconds']:.1f} s wall (exit {r['exit']})")
        for region, why in r["not_reportable"]:
            print(f"    {region}: {why}")
    if "reference" not in blocks:
        return
    rows = {"reference": [], "baseline": [], "throughput": [], "ten_year": []}
    for i in range(args.repeats):
        rows["reference"].append(spawn("reference", 11 + i))
        rows["baseline"].append(spawn("baseline", 11 + i))
        rows["throughput"].append(spawn("throughput", 11 + i))
    if not args.skip_ten_year:
        rows["ten_year"].append(spawn("ten_year", 11))

    def med(key, what):
        vals = [r[what] for r in rows[key]]
        return statistics.median(vals) if vals else float("nan")

    print(f"Engine benchmark, {args.repeats} repeats, medians (this machine, {os.cpu_count()} cores)")
    for key, label in (("reference", "Bendline, reference problem (365 d, K=4, negbin, weekday)"),
                       ("baseline", "Random-walk Metropolis baseline, same posterior"),
                       ("throughput", "Bendline throughput: 32 chains x 1000 draws (min-ESS per s of sampling)"),
                       ("ten_year", "Bendline, 10-year daily series, K=8")):
        if not rows[key]:
            continue
        conv = sum(r["converged"] for r in rows[key])
        print(f"  {label}")
        print(f"    converged {conv}/{len(rows[key])}; seconds to criterion {med(key, 'seconds'):.2f}; "
              f"min ESS {med(key, 'min_ess'):.0f}; min-ESS/s {med(key, 'min_ess_per_s'):.0f}; "
              f"peak memory {med(key, 'peak_mb'):.0f} MB")
        for r in rows[key]:
            extra = f" timings {r['timings']}" if "timings" in r else f" accept {r.get('accept', 0):.2f}"
            print(f"      run: {r['seconds']:.2f} s, chains {r['chains']}, draws/chain {r['draws_per_chain']},{extra}")
    ratios = [b["seconds"] / a["seconds"] for a, b in zip(rows["reference"], rows["baseline"])]
    ess_ratios = [a["min_ess_per_s"] / b["min_ess_per_s"] for a, b in zip(rows["reference"], rows["baseline"])]
    print(f"  speed-up over the baseline (time to criterion, paired runs): median {statistics.median(ratios):.1f}x "
          f"(runs: {', '.join(f'{r:.1f}' for r in ratios)})")
    print(f"  min-ESS/s ratio (Bendline / baseline): median {statistics.median(ess_ratios):.1f}x")


if __name__ == "__main__":
    main()
