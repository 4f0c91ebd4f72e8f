"""Shared helpers of the figure tests (test_figures_main.py, test_figures_panels.py).

The example snapshots in tests/app/data/ are engine snapshots of one run of
the invented daily admissions sample (init, warm-up, sampling, done) and of
the weekly sample (done), stored compactly, from an older engine; the
snapshot_v2_* files are from the current one (``interval_days``,
``series_end``, ``traces.draw`` and ``traces.thin``, diagnostics thresholds,
change-date bins on whole intervals), made by data/make_v2_snapshots.py with
the traces of a few quantities only.
"""

import copy
import json
import math
import os

DATA = os.path.join(os.path.dirname(os.path.abspath(__file__)), "data")
DAILY_PHASES = ("snapshot_00_init", "snapshot_02_warmup", "snapshot_04_sampling", "snapshot_06_done")
V2_SNAPSHOTS = ("snapshot_v2_sampling", "snapshot_v2_done", "snapshot_v2_weekly_done")
ALL_SNAPSHOTS = DAILY_PHASES + ("snapshot_weekly_done",) + V2_SNAPSHOTS
TENTATIVE = [{"day": 70.0, "spread_days": 7.0}, {"day": 170.5, "spread_days": 10.0}]


def _load(name):
    with open(os.path.join(DATA, name + ".json")) as fh:
        return json.load(fh)


def _series_for(name, daily, weekly):
    return weekly if "weekly" in name else daily


def _as_json(fig):
    return json.loads(fig.to_json() if hasattr(fig, "to_json") else json.dumps(fig))


def _unconverged(done):
    snap = copy.deepcopy(done)
    snap["diagnostics"]["converged"] = False
    snap["diagnostics"]["rhat_max"] = 1.04
    snap["diagnostics"]["parameters"][0]["rhat"] = 1.04
    snap["status"] = "unconverged"
    return snap


def _segment(index, start, end, r, doubling=None, halving=None, prob=0.5, rep=None):
    return {"index": index, "start_date": start, "end_date": end,
            "growth_rate_per_day": {"mean": r[1], "median": r[1], "q05": r[0], "q95": r[2]},
            "doubling_time_days": doubling, "halving_time_days": halving, "prob_growing": prob,
            "reproduction_number": rep}


def _rates_snapshot():
    ln2 = math.log(2)
    return {"phase": "done", "diagnostics": {"converged": True}, "segments": [
        _segment(1, "2026-01-05", "2026-03-14", (ln2 / 17, ln2 / 12, ln2 / 9),
                 doubling={"median": 12.0, "q05": 9.0, "q95": 17.0}, prob=1.0,
                 rep={"median": 1.31, "q05": 1.22, "q95": 1.41, "prob_above_1": 1.0}),
        _segment(2, "2026-03-14", "2026-05-02", (-ln2 / 20, -ln2 / 25, -ln2 / 31.4),
                 halving={"median": 25.0, "q05": 20.0, "q95": 31.4}, prob=0.0),
        _segment(3, "2026-05-02", "2026-06-30", (-0.01, 0.008, 0.027),
                 doubling={"median": 86.6, "q05": 25.7, "q95": None}, prob=0.74),
    ]}
