"""Executors hand a run id to something that will fit it.

* :class:`LocalExecutor`: a pool of worker processes on this machine (the
  laptop mode); the web server stays responsive while fits run.
* :class:`InlineExecutor`: fits in the calling thread (tests, scripts).
* The Celery executor for team mode lives in :mod:`app.team.tasks`.

Each takes only the run id; the worker reads everything else from the store.
"""

from __future__ import annotations

import multiprocessing
import threading
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from .execute import execute_run
from .runs import now_iso
from .store import FINISHED


def die_with_parent():
    """Pool initializer: the worker process is killed when the server process dies (Linux).

    Without it, a server killed mid-fit (SIGKILL) leaves its pool processes
    fitting on; the restarted server has already marked their runs failed.
    """
    try:
        import ctypes
        import signal

        libc = ctypes.CDLL("libc.so.6", use_errno=True)
        libc.prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass  # not Linux: the run's final state is still written only by its holder


def _warm():
    """Import the engine in a fresh worker so the first fit starts at once."""
    import bendline.inference.fitting  # noqa: F401

    return True


class LocalExecutor:
    """Fits in a pool of local worker processes.

    Parameters
    ----------
    store : RunStore
        The server's store (used to mark runs whose worker process died).
    workers : int
        Concurrent fits.
    """

    def __init__(self, store, workers=2):
        self.store = store
        self.workers = workers
        self._lock = threading.Lock()
        self._pool = None

    def _get_pool(self):
        with self._lock:
            if self._pool is None:
                ctx = multiprocessing.get_context("spawn")
                self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=ctx,
                                                 initializer=die_with_parent)
            return self._pool

    def warm_up(self):
        """Start the worker processes now rather than on the first fit."""
        pool = self._get_pool()
        for f in [pool.submit(_warm) for _ in range(self.workers)]:
            f.result(timeout=120)

    def submit(self, run_id):
        try:
            fut = self._get_pool().submit(execute_run, self.store.location, run_id)
        except BrokenProcessPool:
            with self._lock:
                self._pool = None
            fut = self._get_pool().submit(execute_run, self.store.location, run_id)
        fut.add_done_callback(lambda f, rid=run_id: self._done(rid, f))
        return fut

    def _done(self, run_id, fut):
        exc = fut.exception()
        if exc is None:
            return
        rec = self.store.get_run(run_id)
        if rec is not None and rec["status"] not in FINISHED:
            self.store.update_run(
                run_id, status="failed", finished_at=now_iso(),
                reason=f"the worker process ended unexpectedly ({type(exc).__name__}: {exc})",
            )
        if isinstance(exc, BrokenProcessPool):
            with self._lock:
                self._pool = None

    def shutdown(self):
        with self._lock:
            if self._pool is not None:
                self._pool.shutdown(wait=False, cancel_futures=True)
                self._pool = None


class InlineExecutor:
    """Fits in the caller's thread (or a background thread)."""

    def __init__(self, store, background=False):
        self.store = store
        self.background = background
        self.threads = []

    def submit(self, run_id):
        if self.background:
            t = threading.Thread(target=execute_run, args=(self.store.location, run_id),
                                 kwargs={"store": self.store}, daemon=True)
            t.start()
            self.threads.append(t)
            return t
        return execute_run(self.store.location, run_id, store=self.store)
