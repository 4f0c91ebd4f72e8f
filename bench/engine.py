"""Engine benchmark: Bendline against what an analyst would run instead, from one run on this machine.

Prints:

* the reference problem (365 invented daily values, K = 4, negative binomial,
  weekday effect), paired run by run on the same seeds:
  - Bendline's engine: seconds from start to the convergence criterion (max
    rank-normalised split R-hat < 1.01, min bulk and tail ESS >= 400),
    min-ESS per second, peak memory;
  - ``bendline fit`` on the same series as a whole process (wall, the
    engine's share, ``bendline fit --help`` and the import of the fit path);
  - a random-walk Metropolis baseline written as a careful practitioner
    would (bench/rwm.py: lean single-vector log density, 4 chains in 4
    processes, adaptive pilot of 20,000 steps with the 2.38/sqrt(d) rule of
    Gelman, Roberts & Gilks 1996 and Roberts & Rosenthal 2001, criterion
    checked every 2,000 steps), with a diagonal and with a dense proposal:
    cost per step, steps per chain and wall to the criterion, and the ratio;
  - NumPyro's NUTS on the same posterior when numpyro and jax are installed
    (bench/peer_numpyro.py; the ``bench`` extra), else a one-line note;
  - Bendline's throughput at 32 chains and a 10-year daily series with K = 8;
* real hard cases (bench/cases.py): coal-mining disasters with a continuous
  trend and jumps and as level shifts, daily_admissions.csv with K = 4 and
  K = 6, the 1854 cholera outbreak;
* forty invented regions through ``bendline batch``.

Each run is its own process, so peak memory (max RSS) is its own. Speed-ups
are ratios of wall times measured in the same sitting; the machine is
shared, so the load average is printed with the figures.

Usage:  python bench/engine.py [--repeats N] [--blocks reference,hard,regions] [--skip-peer]
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


def run_baseline(seed=12, proposal="diag"):
    """The practitioner's random-walk Metropolis (bench/rwm.py), 4 chains in 4 processes, same posterior."""
    from bendline.inference.spec import ModelSpec
    from rwm import run_baseline as rwm_baseline

    series, K = reference_problem()
    return rwm_baseline(series, ModelSpec(segments=K, family="negbin", weekday=True), seed=seed,
                        budget_seconds=BASELINE_BUDGET, proposal=proposal)


def run_peer(seed=13):
    """NumPyro's NUTS on the same posterior (bench/peer_numpyro.py), 4 chains."""
    from bendline.inference.spec import ModelSpec
    from peer_numpyro import run_peer as numpyro_peer

    series, K = reference_problem()
    return numpyro_peer(series, ModelSpec(segments=K, family="negbin", weekday=True), seed=seed,
                        budget_seconds=BASELINE_BUDGET)


def bendline_command():
    """How a user starts Bendline: the console script beside this Python, else ``python -m``."""
    script = os.path.join(os.path.dirname(sys.executable), "bendline")
    return [script] if os.path.exists(script) else [sys.executable, "-m", "bendline.app.cli"]


def run_process(seed):
    """`bendline fit` on the reference series as a user runs it: wall of the whole process, and its engine time."""
    import tempfile

    series, K = reference_problem()
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "reference.csv")
        with open(path, "w", encoding="utf-8") as fh:
            fh.write("date,count\n")
            for t, v in enumerate(series.values):
                fh.write(f"{series.start + np.timedelta64(t, 'D')},{int(v)}\n")
        out = os.path.join(tmp, "result.json")
        cmd = bendline_command() + ["fit", path, "--segments", str(K), "--family", "negbin", "--weekday",
                                    "--seed", str(seed), "--quiet", "--out", out]
        t0 = time.perf_counter()
        proc = subprocess.run(cmd, capture_output=True, text=True)
        seconds = time.perf_counter() - t0
        with open(out, encoding="utf-8") as fh:
            d = json.load(fh)["diagnostics"]
    t0 = time.perf_counter()
    subprocess.run(bendline_command() + ["fit", "--help"], capture_output=True, check=True)
    help_seconds = time.perf_counter() - t0
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "import bendline.app.commands.fit, bendline.inference.fitting, "
                    "bendline.inference.reader"], capture_output=True, check=True)
    import_seconds = time.perf_counter() - t0
    return {"converged": d["converged"], "seconds": seconds, "engine_seconds": d["seconds"], "exit": proc.returncode,
            "help_seconds": help_seconds, "import_seconds": import_seconds, "chains": d["chains"],
            "draws_per_chain": d["draws_per_chain"]}


def run_throughput(seed=11):
    """Sampler throughput: 32 chains, 1000 draws each after warm-up, min-ESS per second of sampling."""
    from bendline.inference.driver import run
    from bendline.inference.model import TrendModel
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
    elif which == "baseline_dense":
        res = run_baseline(seed, proposal="dense")
    elif which == "peer":
        res = run_peer(seed)
    elif which == "process":
        res = run_process(seed)
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


def _med(rows, key):
    vals = [r[key] for r in rows if r.get(key) is not None]
    return statistics.median(vals) if vals else float("nan")


def _runs(rows, key, fmt="{:.2f}"):
    return ", ".join(fmt.format(r[key]) if r.get(key) is not None else "-" for r in rows)


def _ratio_line(label, num, den, key_num="seconds", key_den="seconds"):
    ratios = [a[key_num] / b[key_den] for a, b in zip(num, den)]
    if not ratios:
        return
    print(f"  {label}: median {statistics.median(ratios):.1f}x (runs: {', '.join(f'{r:.1f}' for r in ratios)})")


def reference_block(args):
    """Bendline on the reference problem against the two baselines and the peer, paired run by run."""
    from peer_numpyro import available

    peer = available() and not args.skip_peer
    rows = {k: [] for k in ("reference", "baseline", "baseline_dense", "peer", "process", "throughput", "ten_year")}
    for i in range(args.repeats):
        seed = 11 + i
        rows["reference"].append(spawn("reference", seed))
        rows["process"].append(spawn("process", seed))
        rows["baseline"].append(spawn("baseline", seed))
        rows["baseline_dense"].append(spawn("baseline_dense", seed))
        if peer:
            rows["peer"].append(spawn("peer", seed))
        if not args.skip_throughput:
            rows["throughput"].append(spawn("throughput", seed))
    if not args.skip_ten_year:
        rows["ten_year"].append(spawn("ten_year", 11))
    n = args.repeats
    load = os.getloadavg()
    print(f"Reference problem (365 invented days, K=4, negbin, weekday): {n} paired repeats (seeds 11..{10 + n}), "
          f"medians; {os.cpu_count()} cores; load average after the block {load[0]:.1f} / {load[1]:.1f} / "
          f"{load[2]:.1f} (1 / 5 / 15 min)")
    print("  criterion for every sampler: max rank-normalised split R-hat < 1.01 and min bulk and tail ESS >= 400 "
          "over the same reported quantities (bendline.inference.snapshots.diagnose)")
    ref = rows["reference"]
    print(f"  Bendline engine (8 chains, one process): converged {sum(r['converged'] for r in ref)}/{n}; "
          f"seconds to criterion {_med(ref, 'seconds'):.2f} (runs {_runs(ref, 'seconds')}); "
          f"min ESS {_med(ref, 'min_ess'):.0f}; min-ESS/s {_med(ref, 'min_ess_per_s'):.0f}; "
          f"draws/chain {_med(ref, 'draws_per_chain'):.0f}; peak memory {_med(ref, 'peak_mb'):.0f} MB")
    pr = rows["process"]
    print(f"  `bendline fit` as a process (same series and seeds, --quiet --out): wall {_med(pr, 'seconds'):.2f} s "
          f"(runs {_runs(pr, 'seconds')}), of which engine {_med(pr, 'engine_seconds'):.2f} s "
          f"(runs {_runs(pr, 'engine_seconds')}); outside the engine "
          f"{statistics.median(r['seconds'] - r['engine_seconds'] for r in pr):.2f} s; "
          f"converged {sum(r['converged'] for r in pr)}/{n}")
    print(f"    `bendline fit --help` {_med(pr, 'help_seconds'):.2f} s (runs {_runs(pr, 'help_seconds')}); "
          f"python importing the fit path (cli fit command, fitting, reader) {_med(pr, 'import_seconds'):.2f} s "
          f"(runs {_runs(pr, 'import_seconds')})")
    for key, label in (("baseline", "diagonal proposal (the 2.38/sqrt(d) rule on learned sds)"),
                       ("baseline_dense", "dense proposal (2.38/sqrt(d) times the learned covariance's Cholesky "
                                          "factor, Haario et al. 2001)")):
        b = rows[key]
        print(f"  Random-walk Metropolis, {label}: 4 chains in 4 processes, lean single-vector log density, "
              f"adaptive pilot 20,000 steps/chain, criterion checked every 2,000 steps")
        print(f"    converged {sum(r['converged'] for r in b)}/{n}; wall to criterion {_med(b, 'seconds'):.2f} s "
              f"(runs {_runs(b, 'seconds')}); steps/chain to criterion {_med(b, 'steps_per_chain'):.0f} "
              f"(pilot 20,000 + sampling; runs {_runs(b, 'steps_per_chain', '{:.0f}')}); "
              f"min ESS {_med(b, 'min_ess'):.0f}; min-ESS/s {_med(b, 'min_ess_per_s'):.1f}")
        print(f"    cost per step: lean density {_med(b, 'lean_us_per_call'):.0f} us per call (one process); "
              f"{_med(b, 'us_per_step'):.0f} us of wall per step per chain in the workers (4 processes on "
              f"{os.cpu_count()} cores); acceptance {_med(b, 'accept'):.2f} (pilot {_med(b, 'pilot_accept'):.2f}); "
              f"lean density = TrendModel.log_density to {max(r['lean_max_abs_diff'] for r in b):.1e} "
              f"at {b[0]['lean_points_compared']} points")
        _ratio_line("    Bendline's speed-up (baseline wall / Bendline engine seconds, paired)", b, ref)
        _ratio_line("    same against `bendline fit` as a whole process", b, pr)
        _ratio_line("    min-ESS/s ratio (Bendline engine / baseline)", ref, b, "min_ess_per_s", "min_ess_per_s")
    pe = rows["peer"]
    if pe:
        p0 = pe[0]
        print(f"  NumPyro {p0['numpyro']} NUTS (jax {p0['jax']}, float64 {p0['x64']}), 4 chains, chain_method="
              f"'{p0['chain_method']}' on {p0['devices']} host devices, 1,000 warm-up, then blocks of 250 draws, "
              f"criterion checked after each block")
        print(f"    log density check: NumPyro's minus Bendline's is constant ({p0['density_check_offset']:.4f}) to "
              f"{max(r['density_check_spread'] for r in pe):.1e} over {p0['density_points']} points")
        print(f"    converged {sum(r['converged'] for r in pe)}/{n}; wall to criterion incl. compilation "
              f"{_med(pe, 'seconds'):.2f} s (runs {_runs(pe, 'seconds')}), of which warm-up incl. its compilation "
              f"{_med(pe, 'warmup_seconds'):.2f} s; importing jax+numpyro {_med(pe, 'import_seconds'):.2f} s "
              f"more; draws/chain {_med(pe, 'draws_per_chain'):.0f}; min ESS {_med(pe, 'min_ess'):.0f}; "
              f"min-ESS/s {_med(pe, 'min_ess_per_s'):.1f}; gradients/draw {_med(pe, 'gradients_per_draw'):.0f}; "
              f"divergences {sum(r['divergent'] for r in pe)}")
        _ratio_line("    Bendline's speed-up (NUTS wall / Bendline engine seconds, paired)", pe, ref)
        _ratio_line("    min-ESS/s ratio (Bendline engine / NUTS)", ref, pe, "min_ess_per_s", "min_ess_per_s")
    elif args.skip_peer:
        print("  NumPyro NUTS peer: skipped (--skip-peer)")
    else:
        print("  NumPyro NUTS peer: skipped (numpyro and jax are not installed; pip install -e '.[bench]')")
    th = rows["throughput"]
    if th:
        print(f"  Bendline throughput, 32 chains x 1000 draws: min-ESS per second of sampling "
              f"{_med(th, 'min_ess_per_s'):.0f} (runs {_runs(th, 'min_ess_per_s', '{:.0f}')}); "
              f"converged within the 1000 draws {sum(r['converged'] for r in th)}/{len(th)}")
    ty = rows["ten_year"]
    if ty:
        r = ty[0]
        print(f"  Bendline, 10-year daily series, K=8 (one run): converged {r['converged']}; "
              f"{r['seconds']:.1f} s; min ESS {r['min_ess']:.0f}; peak memory {r['peak_mb']:.0f} MB")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--seed", type=int, default=11, help=argparse.SUPPRESS)
    ap.add_argument("--repeats", type=int, default=3, help="paired repeats (seeds) per case; medians are printed")
    ap.add_argument("--skip-ten-year", action="store_true", help="leave out the 10-year K=8 case")
    ap.add_argument("--skip-throughput", action="store_true", help="leave out the 32-chain throughput run")
    ap.add_argument("--skip-peer", action="store_true", help="leave out the NumPyro NUTS peer")
    ap.add_argument("--blocks", default="reference,hard,regions",
                    help="comma-separated: reference (Bendline, `bendline fit` as a process, the random-walk "
                         "baselines, the NumPyro peer when installed, throughput, 10-year), hard (real series), "
                         "regions (40 invented regions through `bendline batch`)")
    args = ap.parse_args()
    if args.child:
        child(args.child, args.seed)
        return
    blocks = set(args.blocks.split(","))
    if "reference" in blocks:
        reference_block(args)
    if "hard" in blocks:
        hard_block(args.repeats)
    if "regions" in blocks:
        r = spawn("regions", 0)
        print(f"Forty invented regions (365 d, K=3, negbin, weekday) through `bendline batch --workers 2`: "
              f"{r['converged']}/{r['regions']} converged, {r['reportable']}/{r['regions']} reportable, "
              f"{r['seconds']:.1f} s wall (exit {r['exit']})")
        for region, why in r["not_reportable"]:
            print(f"    {region}: {why}")


if __name__ == "__main__":
    main()
