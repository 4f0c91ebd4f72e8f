"""Write the snapshot_v2_* examples of tests/app/data from the current engine.

    PYTHONPATH=. python tests/app/data/make_v2_snapshots.py

The other snapshot_* files are from an older engine (no ``interval_days``,
``series_end``, ``traces.draw`` or diagnostics thresholds; change-date bins a
little wider than a day) and stay as they are: the figures must read both.
To stay small, the v2 files keep the traces of a few quantities only, over
their last 40 kept draws; everything else is the engine's snapshot as made.
"""

from __future__ import annotations

import json
import os

from bendline.inference.fitting import fit_result
from bendline.inference.reader import read_series

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(os.path.dirname(HERE)))
KEEP_TRACES = ("change date 1 (day)", "growth rate 1 (per day)", "log level 0")
KEEP_DRAWS = 40


def _trim(snap):
    snap = dict(snap)
    traces = snap.get("traces")
    if traces:
        keep = [i for i, n in enumerate(traces["names"]) if n in KEEP_TRACES]
        snap["traces"] = dict(
            traces,
            draw=traces["draw"][-KEEP_DRAWS:],
            names=[traces["names"][i] for i in keep],
            values=[[chain[-KEEP_DRAWS:] for chain in traces["values"][i]] for i in keep],
        )
    return snap


def _run(sample, segments):
    snaps = []
    fit_result(read_series(os.path.join(ROOT, "sample_series", sample)),
               {"segments": segments, "gi_mean": 5, "gi_sd": 2, "chains": 8, "seed": 1},
               on_snapshot=snaps.append)
    return snaps


def _write(name, snap):
    with open(os.path.join(HERE, name + ".json"), "w") as fh:
        json.dump(_trim(snap), fh, separators=(",", ":"))


def main():
    daily = _run("daily_admissions.csv", 3)
    sampling = [s for s in daily if s["phase"] == "sampling" and s.get("traces")]
    _write("snapshot_v2_sampling", sampling[-1])
    _write("snapshot_v2_done", daily[-1])
    _write("snapshot_v2_weekly_done", _run("weekly_cases.csv", 4)[-1])


if __name__ == "__main__":
    main()
