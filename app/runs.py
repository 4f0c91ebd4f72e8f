"""Runs as first-class objects: create, submit, stop, watch, reap.

A run holds its input series (and hash), options, seed, owner, status,
snapshots, draws, result and timings. :class:`RunService` is what the
dashboard, the JSON API and the CLI call; it puts the run in the store and
hands only its id to an executor (local worker processes or a Celery task),
never a session, cookie or request header.
"""

from __future__ import annotations

import datetime as _dt
import os
import secrets
import socket
import time

from bendline.inference.errors import InputError
from bendline.inference.model import TrendModel
from bendline.inference.series import Series
from bendline.inference.spec import spec_from_options

from .store import FINISHED, valid_run_id
from .version import CODE_VERSION

#: A running run whose worker has not written a heartbeat for this long is
#: marked failed (its worker died or lost the store). Workers beat every 5 s;
#: with the team server's maintenance every 10 s a dead worker's run is
#: marked failed within 40 s.
HEARTBEAT_TIMEOUT = 30.0


def _busy(rec):
    """A fit that holds a place in its owner's in-flight limit."""
    return (rec.get("kind") not in ("compare", "board") and rec["status"] in ("queued", "running")
            and not rec.get("held"))


def now_iso():
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def new_run_id():
    """16 random hex digits."""
    return secrets.token_hex(8)


def validate_fit(series, options):
    """Validate options against the series the way a fit will: raises InputError."""
    model_spec, _ = spec_from_options(options)
    TrendModel(series, model_spec)


class RunService:
    """Create, submit, stop and read runs.

    Parameters
    ----------
    store : RunStore
    executor : object with ``submit(run_id)``
    instance : str, optional
        Identifies this server process; local runs left queued or running
        by an earlier instance are marked failed on start.
    clock : callable
        Wall-clock seconds.
    max_in_flight : int, optional
        Runs one user may have queued or running at once; further runs wait,
        held, until one of theirs finishes (team mode).
    """

    def __init__(self, store, executor, *, instance=None, clock=time.time, max_in_flight=None):
        self.store = store
        self.executor = executor
        self.store_trouble_at = float("-inf")
        self.instance = instance or f"{socket.gethostname()}:{os.getpid()}:{secrets.token_hex(4)}"
        self.clock = clock
        self.max_in_flight = max_in_flight

    # -- creating
    def submit(self, series, options, *, owner="local", kind="fit", parent=None, spec=None):
        """Validate, store and queue a run; returns its record.

        ``options`` are the engine's (:func:`inference.options.engine_options`);
        ``spec`` the public options as given, kept for the result's ``spec``.

        Raises
        ------
        InputError
            When the options do not fit the series (nothing is stored then).
        """
        if not isinstance(series, Series):
            raise TypeError("series must be a Series")
        validate_fit(series, options)
        run_id = new_run_id()
        record = {
            "id": run_id,
            "kind": kind,
            "parent": parent,
            "owner": owner,
            "created_at": now_iso(),
            "created_ts": self.clock(),
            "series_name": series.name or "series",
            "series_hash": series.content_hash(),
            "series_start": str(series.start),
            "series_end": str(series.end),
            "interval_days": series.interval_days,
            "segments": int(options.get("segments", 3)),
            "options": dict(options),
            "spec": dict(spec) if spec is not None else None,
            "seed": int(options.get("seed", 1)),
            "status": "queued",
            "reason": None,
            "converged": None,
            "code_version": CODE_VERSION,
            "server_instance": self.instance,
            "held": False,
        }
        if self.max_in_flight is not None:
            # the count and the new record in one step: simultaneous submissions
            # cannot all see room for themselves
            with self.store.lock(f"inflight:{owner}"):
                if self.in_flight(owner) >= self.max_in_flight:
                    record["held"] = True
                    record["reason"] = (f"waiting: you already have {self.max_in_flight} runs queued or running; "
                                        "this one starts when one of them finishes")
                self.store.create_run(record, series.to_dict())
        else:
            self.store.create_run(record, series.to_dict())
        if not record["held"]:
            self._queue(run_id)
        return record

    def _queue(self, run_id):
        try:
            self.executor.submit(run_id)
        except Exception as exc:  # queue unreachable: the run must not look alive
            self.store.update_run(run_id, status="failed", reason=f"could not queue the run: {exc}",
                                  finished_at=now_iso())
            raise QueueUnavailable(str(exc)) from exc

    def in_flight(self, owner):
        """Fits of ``owner`` queued or running and not held (a comparison's record is not a fit; its members are)."""
        return sum(1 for r in self.store.list_runs(10_000) if r.get("owner") == owner and _busy(r))

    def maintain(self):
        """Reap runs whose worker stopped beating, and start held runs that now have room.

        Safe to call from several server processes at once: releasing a held
        run is claimed in the store, so it is queued exactly once.
        """
        runs = self.store.list_runs(10_000)
        for rec in runs:
            self._reap(rec)
            if rec.get("kind") == "compare" and rec["status"] == "running":
                SegmentComparison(self).state(rec["id"])  # members done while nobody watched
        if self.max_in_flight is None:
            return
        busy = {}
        for rec in self.store.list_runs(10_000):
            if _busy(rec):
                busy[rec.get("owner")] = busy.get(rec.get("owner"), 0) + 1
        for rec in sorted(self.store.list_runs(10_000), key=lambda r: r.get("created_ts", 0)):
            owner = rec.get("owner")
            if rec["status"] != "queued" or not rec.get("held") or busy.get(owner, 0) >= self.max_in_flight:
                continue
            if not self.store.claim(rec["id"], "release"):
                continue
            self.store.update_run(rec["id"], held=False, reason=None)
            busy[owner] = busy.get(owner, 0) + 1
            try:
                self._queue(rec["id"])
            except QueueUnavailable:
                pass  # marked failed with the reason

    def stop(self, run_id, *, user=None, admin=False):
        """Ask a run to stop (keeps its draws). Only its owner or an admin may."""
        rec = self.get(run_id)
        if rec is None:
            raise KeyError(run_id)
        if user is not None and not admin and rec.get("owner") != user:
            raise PermissionError("only the run's owner or an admin can stop it")
        if rec["status"] in FINISHED:
            return rec
        self.store.request_stop(run_id)
        if rec["status"] == "queued":
            rec = self.store.update_run(run_id, status="stopped", reason="stopped before it started",
                                        finished_at=now_iso())
        return rec

    def delete(self, run_id, *, user=None, admin=False):
        """Delete a run and its data; only its owner or an admin may.

        A finished run goes at once (True). An unfinished one is asked to stop
        and marked for deletion; its worker removes it when it stops (False),
        so no worker writes into a run that is gone.
        """
        rec = self.store.get_run(run_id)
        if rec is None:
            raise KeyError(run_id)
        if user is not None and not admin and rec.get("owner") != user:
            raise PermissionError("only the run's owner or an admin can delete it")
        if rec["status"] not in FINISHED:
            self.store.update_run(run_id, delete_requested=True)
            rec = self.stop(run_id, user=user, admin=admin)
        if rec["status"] in FINISHED:
            self.store.delete_run(run_id)
            return True
        return False

    # -- reading
    def get(self, run_id):
        """The run record (None for unknown or malformed ids), reaped if stale."""
        if not valid_run_id(run_id):
            return None
        rec = self.store.get_run(run_id)
        if rec is None:
            return None
        return self._reap(rec)

    def list(self, limit=200):
        """Runs and comparisons, newest first (boards are listed by :class:`app.boards.BoardService`)."""
        return [self._reap(r) for r in self.store.list_runs(limit) if r.get("kind") != "board"]

    def snapshot(self, run_id):
        return self.store.get_snapshot(run_id) if valid_run_id(run_id) else None

    def result(self, run_id):
        return self.store.get_result(run_id) if valid_run_id(run_id) else None

    def series(self, run_id):
        d = self.store.get_series(run_id) if valid_run_id(run_id) else None
        return None if d is None else Series.from_dict(d)

    def _reap(self, rec):
        """Mark a running run failed when its worker stopped beating.

        Not within a heartbeat period of this server last failing to reach
        the store: the workers could not beat either, and they resume when
        the store is back.
        """
        if rec["status"] != "running":
            return rec
        beat = self.store.last_heartbeat(rec["id"])
        now = self.clock()
        if beat is not None and now - beat > HEARTBEAT_TIMEOUT and now - self.store_trouble_at > HEARTBEAT_TIMEOUT:
            failed = self.store.update_run_if(
                rec["id"], {"status": "running"}, status="failed", finished_at=now_iso(),
                reason=f"the worker sent no heartbeat for {HEARTBEAT_TIMEOUT:.0f} s while the store was up: it "
                       "was killed, crashed or lost its connection. Resubmit the run.",
            )
            return failed or self.store.get_run(rec["id"]) or rec
        return rec

    def store_unreachable(self):
        """Note that the store could not be reached just now (see :meth:`_reap`)."""
        self.store_trouble_at = self.clock()

    def fail_orphans(self):
        """On a local server's start: runs an earlier server left unfinished are marked failed."""
        n = 0
        for rec in self.store.list_runs(10_000):
            if rec["status"] in ("queued", "running") and rec.get("server_instance") != self.instance:
                self.store.update_run(
                    rec["id"], status="failed", finished_at=now_iso(),
                    reason="the server stopped before this run finished; resubmit it",
                )
                n += 1
        return n


class SegmentComparison:
    """"How many segments?": one fit per K = 1..6, then PSIS-LOO support.

    The comparison is a run record of kind ``compare`` whose members are
    ordinary runs of kind ``segment-count`` (so they run in parallel on the
    workers); when every member has finished, :meth:`state` combines their
    PSIS-LOO summaries with :func:`inference.compare.support_from_fits` and
    stores the support as the comparison's result.
    """

    def __init__(self, runs):
        self.runs = runs

    def start(self, series, options, *, owner="local", ks=(1, 2, 3, 4, 5, 6)):
        from bendline.inference.compare import _options_for

        parent = new_run_id()
        record = {
            "id": parent, "kind": "compare", "owner": owner, "created_at": now_iso(),
            "created_ts": self.runs.clock(), "series_name": series.name or "series",
            "series_hash": series.content_hash(), "segments": None, "options": dict(options),
            "seed": int(options.get("seed", 1)), "status": "running", "reason": None,
            "members": [], "infeasible": [], "members_pending": True, "code_version": CODE_VERSION,
            "server_instance": self.runs.instance,
        }
        # the record first, so a member that ends at once finds its comparison
        self.runs.store.create_run(record, series.to_dict())
        members, infeasible = [], []
        for k in ks:
            try:
                rec = self.runs.submit(series, _options_for(options, k), owner=owner, kind="segment-count",
                                       parent=parent)
                members.append({"segments": k, "run": rec["id"]})
            except InputError as exc:
                infeasible.append({"segments": k, "feasible": False, "reason": exc.detail})
        self.runs.store.update_run(parent, members=members, infeasible=infeasible, members_pending=False)
        done, _support = self.state(parent)  # members that already ended (an inline executor) complete it now
        return done or self.runs.get(parent)

    def state(self, compare_id):
        """(record, support list or None): finishes the comparison when all members are done."""
        from bendline.inference.compare import change_probability, support_from_fits

        rec = self.runs.get(compare_id)
        if rec is None or rec.get("kind") != "compare":
            return None, None
        done = self.runs.result(compare_id)
        if done is not None:
            return rec, done["segment_support"]
        if rec.get("members_pending"):
            return rec, None  # still submitting its members
        if rec["status"] in FINISHED:
            return rec, None  # failed (no segment count could be compared)
        fits = list(rec.get("infeasible", []))
        finished = 0
        statuses = []
        for m in rec["members"]:
            child = self.runs.get(m["run"])
            statuses.append((child or {}).get("status", "failed"))
            if child is None or child["status"] in FINISHED:  # a deleted member counts as failed
                finished += 1
                res = self.runs.result(m["run"])
                if res and "loo" in res:
                    fits.append(res["loo"])
                else:
                    fits.append({"segments": m["segments"], "feasible": False,
                                 "reason": (child or {}).get("reason") or "the fit did not finish"})
        rec = dict(rec, finished=finished)
        if finished < len(rec["members"]):
            return rec, None
        try:
            support = support_from_fits(fits)
        except InputError as exc:
            self.runs.store.update_run(compare_id, status="failed", reason=exc.detail, finished_at=now_iso())
            return self.runs.get(compare_id), None
        for row in support:
            row.pop("pointwise", None)
        self.runs.store.put_result(compare_id, {"segment_support": support,
                                                "change_probability": change_probability(fits, support)})
        # converged only when every member fit is: a failed or stopped member leaves it unconverged
        all_converged = all(st == "converged" for st in statuses) and all(
            s.get("converged") for s in support if s.get("feasible"))
        rec = self.runs.store.update_run(
            compare_id, status="converged" if all_converged else "unconverged", finished_at=now_iso(),
            reason=None if all_converged else "not every segment count's fit converged; read the support with care")
        return rec, support

    def change_probability(self, compare_id):
        """The finished comparison's change probability averaged over K, or None."""
        done = self.runs.result(compare_id)
        return (done or {}).get("change_probability")


class QueueUnavailable(RuntimeError):
    """The executor could not take the run (e.g. Redis unreachable)."""
