"""The body of a fit on a worker: read the run from the store, sample, write back.

The same function runs in a local worker process and inside the Celery task;
its only input is the store location and the run id.
"""

from __future__ import annotations

import os
import socket
import threading
import time

from bendline.inference.errors import InputError
from bendline.inference.fitting import fit_result
from bendline.inference.series import Series

from .runs import now_iso
from .store import FINISHED, StoreSink, open_store
from .version import CODE_VERSION

#: The worker re-reads the stop flag at most this often (seconds).
STOP_POLL = 0.25
#: ... and a thread writes its heartbeat this often while the fit runs.
HEARTBEAT_EVERY = 5.0


def execute_run(store_location, run_id, *, store=None):
    """Fit one stored run; returns its final status.

    Parameters
    ----------
    store_location : str
        Where to open the run store (see :func:`app.store.open_store`).
    run_id : str
    store : RunStore, optional
        An already open store (tests); otherwise opened from the location.
    """
    store = store or open_store(store_location)
    rec = store.get_run(run_id)
    if rec is None:
        return "missing"
    if rec["status"] in FINISHED:
        return rec["status"]  # stopped while queued, or delivered twice
    if rec.get("code_version") not in (None, CODE_VERSION):
        store.update_run(
            run_id, status="failed", finished_at=now_iso(),
            reason=(f"this worker runs engine version {CODE_VERSION} but the run was made by "
                    f"version {rec.get('code_version')}; update the worker and resubmit"),
        )
        return "failed"
    if store.stop_requested(run_id):
        store.update_run(run_id, status="stopped", reason="stopped before it started", finished_at=now_iso())
        return "stopped"
    if not store.claim(run_id, "execute"):
        return "duplicate"  # another worker already took this run
    started = time.time()
    me = f"{socket.gethostname()}:{os.getpid()}"
    store.heartbeat(run_id, started)
    store.update_run(run_id, status="running", started_at=now_iso(), worker=me)
    beating = threading.Event()
    threading.Thread(target=_beat, args=(store, run_id, beating), daemon=True).start()
    poll = {"t": 0.0, "stop": False}

    def on_snapshot(snap):
        try:
            store.put_snapshot(run_id, snap)
        except ConnectionError:
            pass  # the store is away for a moment: the next snapshot will do

    def should_stop():
        now = time.time()
        if now - poll["t"] > STOP_POLL:
            poll["t"] = now
            try:
                poll["stop"] = store.stop_requested(run_id)
            except ConnectionError:
                pass  # the store is away for a moment; keep sampling
        return poll["stop"]

    sink = StoreSink(store, run_id)
    try:
        series = Series.from_dict(_patiently(lambda: store.get_series(run_id)))
        result, final = fit_result(
            series, rec["options"], sink=sink,
            on_snapshot=on_snapshot, should_stop=should_stop, given=rec.get("spec"),
        )
        if result is not None:
            result["run_id"] = run_id
            if rec.get("kind") == "segment-count":
                result["loo"] = _loo(series, rec["options"], sink, final)
        status = final["status"] if final else "failed"
        fields = {
            "status": status,
            "finished_at": now_iso(),
            "seconds": round(time.time() - started, 3),
            "converged": bool(result and result["diagnostics"]["converged"]),
            "reportable": bool(result and result["diagnostics"].get("reportable")),
            "draws_per_chain": final.get("draws_per_chain") if final else 0,
        }
        if status == "stopped":
            fields["reason"] = "stopped by request; the draws so far are kept" if result else \
                "stopped during warm-up; no draws were kept"
        elif status == "unconverged":
            fields["reason"] = {"time budget": "the time budget (max_seconds) ended before convergence",
                                "draw limit": "the draw limit (max_draws) was reached before convergence"}.get(
                (final or {}).get("ended_by"), "the run ended before convergence")
        _finish(store, run_id, me, fields, final, result, sink=sink)
        if rec.get("kind") == "segment-count" and rec.get("parent"):
            _finish_comparison(store, rec["parent"])
        return status
    except InputError as exc:
        _finish(store, run_id, me, {"status": "failed", "reason": str(exc), "finished_at": now_iso()})
        return "failed"
    except MemoryError:
        _finish(store, run_id, me, {"status": "failed", "finished_at": now_iso(),
                                    "reason": "the worker ran out of memory; try fewer chains or draws"})
        return "failed"
    except ConnectionError:  # the store stayed away longer than the worker's patience
        _finish(store, run_id, me, {"status": "failed", "finished_at": now_iso(),
                                    "reason": "the worker lost the run store (Redis) for too long; resubmit the run"})
        return "failed"
    except Exception as exc:  # report, never hang
        _finish(store, run_id, me, {"status": "failed", "finished_at": now_iso(),
                                    "reason": f"internal error in the worker ({type(exc).__name__}: {exc})"})
        return "failed"
    finally:
        beating.set()


#: How long a finished worker keeps trying to write its result while the
#: store is unreachable (seconds).
WRITE_PATIENCE = 900.0


def _patiently(read, *, sleep=time.sleep, clock=time.monotonic):
    """``read()``, retried every 2 s while the store is away, for :data:`WRITE_PATIENCE` seconds."""
    deadline = clock() + WRITE_PATIENCE
    while True:
        try:
            return read()
        except ConnectionError:
            if clock() > deadline:
                raise
            sleep(2.0)


def _finish(store, run_id, me, fields, final=None, result=None, *, sink=None, sleep=time.sleep,
            clock=time.monotonic):
    """Write a run's final state once, and only while this worker still holds it.

    The status goes first, conditionally (:meth:`RunStore.update_run_if`):
    a run the server has meanwhile marked failed, or one deleted, keeps its
    state and gets nothing from this worker. A run marked for deletion is
    removed here, by the worker that held it. Draws that waited out a store
    outage in ``sink`` go first. While the store is away the write is
    retried for :data:`WRITE_PATIENCE` seconds.
    """
    deadline = clock() + WRITE_PATIENCE
    while True:
        try:
            rec = store.get_run(run_id)
            if rec is not None and rec.get("delete_requested"):
                store.delete_run(run_id)
                return False
            if sink is not None:
                sink.flush()
            if store.update_run_if(run_id, {"status": "running", "worker": me}, **fields) is None:
                return False  # failed by the server, taken over, or deleted: not ours to write
            if final is not None:
                store.put_snapshot(run_id, final)
            if result is not None:
                store.put_result(run_id, result)
            return True
        except ConnectionError:
            if clock() > deadline:
                return False
            sleep(2.0)


def _finish_comparison(store, compare_id):
    """The last member of a segment-count comparison to end completes it (no browser needed)."""
    from .runs import RunService, SegmentComparison

    try:
        SegmentComparison(RunService(store, executor=None)).state(compare_id)
    except ConnectionError:
        pass  # the server's maintenance pass completes it when the store is back


def _loo(series, options, sink, final):
    """PSIS-LOO of a member of a segment-count comparison, from its draws."""
    from bendline.inference.compare import loo_summary
    from bendline.inference.model import TrendModel
    from bendline.inference.spec import spec_from_options

    model = TrendModel(series, spec_from_options(options)[0])
    positions, _ = sink.read()
    return loo_summary(model, positions, final)


def _beat(store, run_id, done):
    """Write the run's heartbeat every few seconds while the fit runs.

    A separate thread, so a long start search or convergence check never
    looks like a dead worker; a killed process stops beating at once. While
    the store is away it retries every second, so the heartbeat resumes as
    soon as the store is back.
    """
    wait = HEARTBEAT_EVERY
    while not done.wait(wait):
        try:
            store.heartbeat(run_id, time.time())
            wait = HEARTBEAT_EVERY
        except ConnectionError:
            wait = 1.0
