"""A board on the team server, fitted across two Celery workers, one killed mid-way.

The killed worker's run fails with the reason (no heartbeat); every other
run, and the board itself, are kept; the failed series is fitted again from
the board and finishes on the surviving worker. The runs are held open by
their work (LONG: far more iterations than any test waits for) and stopped
by the test, so nothing depends on the machine's speed.
"""

from __future__ import annotations

import os
import time

import pytest

from ..browser.conftest import ROOT
from .conftest import USER
from .test_team_runs import LONG, Api

pytestmark = [pytest.mark.team, pytest.mark.slow]
REGIONS = os.path.join(ROOT, "sample_series", "regions_long.csv")


def _board(api, board_id):
    code, board = api.call("GET", f"/api/v1/boards/{board_id}")
    assert code == 200, board
    return {s["name"]: s for s in board["releases"][-1]["series"]}


def _wait(api, board_id, check, what, timeout=120):
    deadline = time.time() + timeout
    rows = None
    while time.time() < deadline:
        rows = _board(api, board_id)
        if check(rows):
            return rows
        time.sleep(0.5)
    raise AssertionError(f"{what} never happened; last: {[(n, r['status']) for n, r in (rows or {}).items()]}")


def test_a_board_across_two_workers_survives_one_killed_and_refits_its_series(team_server, team_users, workers):
    api = Api(team_server.url, team_users.new_token(USER))
    w1, w2 = workers("w1"), workers("w2")
    board = api.submit_file(REGIONS, dict(LONG, segments=1, by="district"), endpoint="/api/v1/boards")
    bid = board["id"]
    # two series sampling, one on each worker (concurrency 1, no prefetch); the other two wait
    rows = _wait(api, bid, lambda r: sum(s["status"] == "running" for s in r.values()) == 2, "two runs started")
    w1.kill()
    rows = _wait(api, bid, lambda r: any(s["status"] == "failed" for s in r.values()),
                 "the killed worker's run failed", timeout=150)
    failed = [n for n, s in rows.items() if s["status"] == "failed"]
    assert len(failed) == 1 and "heartbeat" in rows[failed[0]]["reason"]
    # stop what is left: the running one on w2 and the two that wait
    for name, s in rows.items():
        if s["status"] in ("running", "queued"):
            assert api.call("POST", f"/api/v1/runs/{s['run_id']}/stop")[0] == 202
    rows = _wait(api, bid, lambda r: all(s["status"] in ("failed", "stopped") for s in r.values()),
                 "every run ended")
    kept = {n: s["run_id"] for n, s in rows.items() if n not in failed}
    # fit the failed series again from the board, small enough to finish
    code, body = api.call("POST", f"/api/v1/boards/{bid}/refit",
                          {"series": failed, "spec": {"draws": 100, "max_draws": 100, "thin": 1}})
    assert code == 202, body
    new = body["refit"][failed[0]]
    rows = _wait(api, bid, lambda r: r[failed[0]]["status"] in ("converged", "unconverged"),
                 "the refit finished on the surviving worker", timeout=240)
    assert rows[failed[0]]["run_id"] == new and rows[failed[0]]["current"]["direction"]
    # nothing else lost: the other series keep their (stopped) runs, readable
    for name, run_id in kept.items():
        assert rows[name]["run_id"] == run_id
        assert api.call("GET", f"/api/v1/runs/{run_id}")[0] == 200
    w2.stop()
