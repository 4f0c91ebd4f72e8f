"""Runs: submit, execute, stop, reap, survive restarts."""

from __future__ import annotations


import numpy as np
import pytest

from bendline.app.executors import InlineExecutor
from bendline.app.runs import RunService
from bendline.app.store.disk import DiskRunStore
from bendline.inference.errors import InputError
from bendline.inference.simulate import simulate


@pytest.fixture
def series():
    s, _ = simulate(np.random.default_rng(3), "2026-01-05", 90, start_level=20.0,
                    knot_days=[45.0], growth_rate_per_day=[0.03, -0.02], dispersion=40.0)
    return s


FAST = {"segments": 2, "chains": 4, "draws": 100, "seed": 5, "weekday": False}


def test_a_run_goes_from_queued_to_converged_with_result_and_draws(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    svc = RunService(store, InlineExecutor(store))
    rec = svc.submit(series, FAST, owner="ana")
    done = svc.get(rec["id"])
    assert done["status"] in ("converged", "unconverged")
    assert done["owner"] == "ana" and done["series_hash"] == series.content_hash()
    assert svc.result(rec["id"])["run_id"] == rec["id"]
    assert svc.snapshot(rec["id"])["phase"] == "done"
    pos, _ = store.read_draws(rec["id"])
    assert pos.shape[0] == 4 and pos.shape[1] == done["draws_per_chain"]


def test_bad_options_store_nothing(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    svc = RunService(store, InlineExecutor(store))
    with pytest.raises(InputError, match="segments"):
        svc.submit(series, dict(FAST, segments=9, min_segment_days=14))
    assert svc.list() == []


def test_stop_before_start_and_owner_rules(tmp_path, series):
    store = DiskRunStore(str(tmp_path))

    class Holding:
        def submit(self, run_id):
            pass  # keeps the run queued

    svc = RunService(store, Holding())
    rec = svc.submit(series, FAST, owner="ana")
    with pytest.raises(PermissionError):
        svc.stop(rec["id"], user="bo")
    assert svc.stop(rec["id"], user="bo", admin=True)["status"] == "stopped"
    with pytest.raises(PermissionError):
        svc.delete(rec["id"], user="bo")
    svc.delete(rec["id"], user="ana")
    assert svc.get(rec["id"]) is None


def test_a_stop_request_during_sampling_keeps_the_draws(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    rec = RunService(store, type("H", (), {"submit": lambda self, r: None})()).submit(
        series, dict(FAST, draws=100000), owner="ana")
    calls = {"n": 0}
    real = store.stop_requested

    def stop_after_a_while(run_id):
        calls["n"] += 1
        return calls["n"] > 40 or real(run_id)

    store.stop_requested = stop_after_a_while
    import bendline.app.execute as ex

    old = ex.STOP_POLL
    ex.STOP_POLL = 0.0
    try:
        status = ex.execute_run(store.location, rec["id"], store=store)
    finally:
        ex.STOP_POLL = old
    assert status == "stopped"
    after = store.get_run(rec["id"])
    assert after["status"] == "stopped"
    assert "kept" in after["reason"] or "no draws" in after["reason"]


def test_silent_worker_is_reaped_as_failed(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    now = [1000.0]
    svc = RunService(store, type("H", (), {"submit": lambda self, r: None})(), clock=lambda: now[0])
    rec = svc.submit(series, FAST)
    store.update_run(rec["id"], status="running")
    store.heartbeat(rec["id"], 1000.0)
    now[0] = 1030.0
    assert svc.get(rec["id"])["status"] == "running"
    now[0] = 1061.0
    got = svc.get(rec["id"])
    assert got["status"] == "failed" and "heartbeat" in got["reason"]


def test_runs_survive_a_restart_and_orphans_are_marked(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    svc = RunService(store, InlineExecutor(store), instance="first")
    done = svc.submit(series, FAST)
    held = RunService(store, type("H", (), {"submit": lambda self, r: None})(), instance="first").submit(series, FAST)
    store.close()
    # a new server process opens the same folder
    store2 = DiskRunStore(str(tmp_path))
    svc2 = RunService(store2, InlineExecutor(store2), instance="second")
    assert svc2.fail_orphans() == 1
    assert svc2.get(held["id"])["status"] == "failed"
    assert svc2.get(done["id"])["status"] in ("converged", "unconverged")
    assert svc2.result(done["id"]) is not None
    # the failed run's series and options are kept, so it can be fitted again
    again = svc2.submit(svc2.series(held["id"]), svc2.get(held["id"])["options"], owner="ana")
    assert svc2.get(again["id"])["status"] in ("converged", "unconverged")


def test_version_mismatch_is_reported_not_hung(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    rec = RunService(store, type("H", (), {"submit": lambda self, r: None})()).submit(series, FAST)
    store.update_run(rec["id"], code_version="0.0.0-other")
    from bendline.app.execute import execute_run

    assert execute_run(store.location, rec["id"], store=store) == "failed"
    assert "version" in store.get_run(rec["id"])["reason"]


def test_runs_past_the_per_user_limit_wait_and_start_when_room_frees(tmp_path, series):
    store = DiskRunStore(str(tmp_path))
    queued = []

    class Recording:
        def submit(self, run_id):
            queued.append(run_id)

    svc = RunService(store, Recording(), max_in_flight=2)
    a = svc.submit(series, FAST, owner="ana")
    b = svc.submit(series, FAST, owner="ana")
    c = svc.submit(series, FAST, owner="ana")
    other = svc.submit(series, FAST, owner="bo")
    assert queued == [a["id"], b["id"], other["id"]]
    held = svc.get(c["id"])
    assert held["held"] and held["status"] == "queued" and "waiting" in held["reason"]
    svc.maintain()
    assert c["id"] not in queued  # still no room
    store.update_run(a["id"], status="converged")
    svc.maintain()
    svc.maintain()  # a second server process doing the same must not queue it twice
    assert queued.count(c["id"]) == 1
    assert not svc.get(c["id"])["held"]


def test_a_segment_comparison_fits_each_count_and_recommends_one(tmp_path, series):
    from bendline.app.runs import SegmentComparison

    store = DiskRunStore(str(tmp_path))
    svc = RunService(store, InlineExecutor(store))
    cmp = SegmentComparison(svc)
    rec = cmp.start(series, dict(FAST, draws=150, min_segment_days=14), owner="ana", ks=(1, 2, 3, 9))
    assert [m["segments"] for m in rec["members"]] == [1, 2, 3]
    assert rec["infeasible"][0]["segments"] == 9  # too many for 90 days: reported, not fitted
    assert rec["status"] == "converged"  # completed on the server, without anyone asking for its state
    done, support = cmp.state(rec["id"])
    assert done["status"] == "converged"
    assert [s["segments"] for s in support] == [1, 2, 3, 9]
    assert [s["segments"] for s in support if s["recommended"]] == [2]
    assert sum(s["weight"] for s in support) == pytest.approx(1.0, abs=1e-3)
    again, support2 = cmp.state(rec["id"])  # stored: the same answer without recomputing
    assert support2 == support


def test_a_comparison_is_not_a_run_in_flight_and_ends_when_its_members_do(tmp_path, series):
    from bendline.app.runs import SegmentComparison

    class Holding:
        def __init__(self):
            self.queued = []

        def submit(self, run_id):
            self.queued.append(run_id)

    store = DiskRunStore(str(tmp_path))
    executor = Holding()
    svc = RunService(store, executor, max_in_flight=1)
    rec = SegmentComparison(svc).start(series, dict(FAST, min_segment_days=14), owner="ana", ks=(1, 2))
    first, second = (m["run"] for m in rec["members"])
    assert executor.queued == [first] and svc.get(second)["held"]
    assert svc.in_flight("ana") == 1  # the member, not the comparison's own record
    store.update_run(first, status="converged")
    svc.maintain()
    assert executor.queued == [first, second]  # the comparison's record did not hold its member back
    store.update_run(second, status="failed", reason="killed")
    svc.maintain()  # nobody polls the comparison: the server's maintenance pass ends it
    done = svc.get(rec["id"])
    # ended, and not converged: here no member left a result to compare, so it failed with the reason
    assert done["status"] == "failed" and "no segment count" in done["reason"]


@pytest.mark.parametrize("backend", ["disk", "redis"])
def test_the_in_flight_limit_holds_under_simultaneous_submissions(tmp_path, series, backend, request):
    import threading

    if backend == "disk":
        store = DiskRunStore(str(tmp_path))
    else:
        from bendline.app.store.redis_store import RedisRunStore

        store = RedisRunStore(request.getfixturevalue("redis_url"))

    class Holding:
        def submit(self, run_id):
            pass  # queued runs stay in flight

    svc = RunService(store, Holding(), max_in_flight=2)
    barrier = threading.Barrier(12)

    def submit():
        barrier.wait()
        svc.submit(series, FAST, owner="ana")

    threads = [threading.Thread(target=submit) for _ in range(12)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(60)
    runs = [r for r in store.list_runs(100) if r.get("owner") == "ana"]
    assert len(runs) == 12
    assert sum(not r.get("held") for r in runs) == 2  # two run, ten wait their turn


def test_a_worker_never_overwrites_a_run_the_server_already_failed(tmp_path, series):
    from bendline.app.execute import _finish

    store = DiskRunStore(str(tmp_path))

    class Holding:
        def submit(self, run_id):
            pass

    svc = RunService(store, Holding())
    rid = svc.submit(series, FAST, owner="ana")["id"]
    store.update_run(rid, status="running", worker="old-host:1")
    store.update_run(rid, status="failed", reason="the server stopped before this run finished; resubmit it")
    assert _finish(store, rid, "old-host:1", {"status": "converged"}, {"phase": "done"}, {"x": 1}) is False
    assert store.get_run(rid)["status"] == "failed" and store.get_result(rid) is None
