"""Run stores: where runs, their snapshots, draws and results live.

One small interface (:class:`RunStore`), several backends: a diskcache
folder for the laptop (:mod:`app.store.disk`) and Redis for the team server
(:mod:`app.store.redis_store`). Workers write, browsers read; every backend
passes the same contract tests (tests/app/test_store_contract.py).

:func:`open_store` builds a store from a location string, so a worker
process can open the same store from plain data: a folder path (or
``disk:PATH``) or a ``redis://`` URL.
"""

from __future__ import annotations

import re

import numpy as np

RUN_ID = re.compile(r"^[0-9a-f]{16}$")
STATUSES = ("queued", "running", "converged", "unconverged", "stopped", "failed")
FINISHED = frozenset({"converged", "unconverged", "stopped", "failed"})


class StoreUnavailable(ConnectionError):
    """The run store cannot be reached or refuses service; the message names where.

    A subclass of the built-in :class:`ConnectionError`, so code that only
    knows about that (e.g. the worker's presence loop) catches it too.
    """


class BadRedisUrl(ValueError):
    """The Redis URL cannot be used (wrong scheme, bad port or option)."""


def valid_run_id(run_id):
    """True for a well-formed run id (16 lowercase hex digits). Callers check
    ids from requests with this before any store lookup is built from them."""
    return isinstance(run_id, str) and bool(RUN_ID.match(run_id))


class RunStore:
    """The run-store contract. Backends implement every method.

    Records are JSON-safe dicts; draws are numpy arrays. Methods taking a
    ``run_id`` expect a valid id (see :func:`valid_run_id`).
    """

    location = ""

    # -- runs
    def create_run(self, record, series):
        """Store a new run record and its input series (dict)."""
        raise NotImplementedError

    def get_run(self, run_id):
        """The run record, or None."""
        raise NotImplementedError

    def update_run(self, run_id, **fields):
        """Merge ``fields`` into the record; returns the new record (None if absent)."""
        raise NotImplementedError

    def update_run_if(self, run_id, expect, **fields):
        """Merge ``fields`` only while the record's fields equal ``expect``, in one step.

        Returns the new record, or None when the run is absent or has moved
        on (another writer changed one of the expected fields). A worker
        writes a run's final state this way, so a run the server already
        marked failed, or one being deleted, is never overwritten.
        """
        raise NotImplementedError

    def lock(self, name, seconds=10.0):
        """A context manager holding a short, store-wide lock (for check-then-act steps)."""
        raise NotImplementedError

    def list_runs(self, limit=200):
        """Run records, newest first."""
        raise NotImplementedError

    def delete_run(self, run_id):
        """Remove a run and everything stored for it."""
        raise NotImplementedError

    def get_series(self, run_id):
        """The run's input series (``Series.to_dict()``), or None."""
        raise NotImplementedError

    # -- progress
    def put_snapshot(self, run_id, snapshot):
        """Replace the run's latest snapshot."""
        raise NotImplementedError

    def get_snapshot(self, run_id):
        """The latest snapshot, or None."""
        raise NotImplementedError

    def put_result(self, run_id, result):
        raise NotImplementedError

    def get_result(self, run_id):
        raise NotImplementedError

    # -- draws (the engine's sink contract, per run)
    def reset_draws(self, run_id, chains, names):
        raise NotImplementedError

    def append_draws(self, run_id, positions, log_density):
        raise NotImplementedError

    def read_draws(self, run_id):
        """(positions (chains, draws, dim), log_density (chains, draws)) or empty arrays."""
        raise NotImplementedError

    # -- control
    def request_stop(self, run_id):
        raise NotImplementedError

    def stop_requested(self, run_id):
        raise NotImplementedError

    def heartbeat(self, run_id, when):
        raise NotImplementedError

    def last_heartbeat(self, run_id):
        raise NotImplementedError

    # -- uploads waiting to become runs
    def put_upload(self, key, data, ttl_seconds=86400):
        raise NotImplementedError

    def get_upload(self, key):
        raise NotImplementedError

    def claim(self, run_id, what):
        """Atomically claim a one-time step of a run (e.g. "execute"); True for the first caller only."""
        raise NotImplementedError

    # -- liveness
    def ping(self):
        """True when the store answers."""
        raise NotImplementedError


def open_store(location):
    """Open a run store from a location string.

    Parameters
    ----------
    location : str
        ``redis://HOST:PORT/DB`` for Redis; otherwise a folder path,
        optionally prefixed ``disk:``.
    """
    if location.startswith(("redis://", "rediss://", "unix://")):
        from .redis_store import RedisRunStore

        return RedisRunStore(location)
    from .disk import DiskRunStore

    return DiskRunStore(location[5:] if location.startswith("disk:") else location)


class StoreSink:
    """The engine's draw-sink contract on top of a run store, kept working through a store outage.

    The draws are kept in memory as well (the engine's own checks read them
    from there) and written through to the store for the panels and for
    other processes. While the store cannot be reached, blocks wait in order
    and go out with the next write that succeeds; :meth:`flush` sends what
    is still waiting (the worker calls it before writing the final state).
    """

    def __init__(self, store, run_id):
        from bendline.inference.sinks import MemorySink

        self.store = store
        self.run_id = run_id
        self._local = MemorySink()
        self._waiting = []  # ("reset", chains, names) or ("append", positions, log_density)

    def reset(self, chains, names):
        self._local.reset(chains, names)
        self._waiting = [("reset", chains, list(names))]
        self.flush(quiet=True)

    def append(self, positions, log_density):
        self._local.append(positions, log_density)
        self._waiting.append(("append", np.asarray(positions), np.asarray(log_density)))
        self.flush(quiet=True)

    def flush(self, quiet=False):
        """Send every waiting block, in order; True when none is left.

        With ``quiet``, an unreachable store leaves them waiting; otherwise
        its :class:`ConnectionError` is raised.
        """
        try:
            while self._waiting:
                what, a, b = self._waiting[0]
                if what == "reset":
                    self.store.reset_draws(self.run_id, a, b)
                else:
                    self.store.append_draws(self.run_id, a, b)
                self._waiting.pop(0)
        except ConnectionError:
            if not quiet:
                raise
            return False
        return True

    def read(self):
        return self._local.read()

    @property
    def draws(self):
        return self._local.draws
