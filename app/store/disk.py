"""A run store in a diskcache folder: the laptop's store.

diskcache keeps values in SQLite plus files, safe across processes, so the
web server and its worker processes share one folder. The folder must be
given explicitly (each process would otherwise get its own temporary one).
"""

from __future__ import annotations

import os

import diskcache
import numpy as np

from . import RunStore


class DiskRunStore(RunStore):
    """Run store in a diskcache folder.

    Parameters
    ----------
    directory : str
        Folder holding the store; created if absent.
    """

    def __init__(self, directory):
        directory = os.path.abspath(os.path.expanduser(directory))
        os.makedirs(directory, exist_ok=True)
        self.directory = directory
        self.location = directory
        self._cache = diskcache.Cache(directory, size_limit=8 * 2**30, eviction_policy="none")

    # keys
    @staticmethod
    def _k(run_id, part):
        return f"run:{run_id}:{part}"

    def create_run(self, record, series):
        run_id = record["id"]
        with self._cache.transact():
            self._cache.set(self._k(run_id, "series"), series)
            self._cache.set(self._k(run_id, "meta"), dict(record))
            index = self._cache.get("runs:index", [])
            self._cache.set("runs:index", [run_id] + [r for r in index if r != run_id])

    def get_run(self, run_id):
        return self._cache.get(self._k(run_id, "meta"))

    def update_run(self, run_id, **fields):
        with self._cache.transact():
            rec = self._cache.get(self._k(run_id, "meta"))
            if rec is None:
                return None
            rec = dict(rec, **fields)
            self._cache.set(self._k(run_id, "meta"), rec)
        return rec

    def update_run_if(self, run_id, expect, **fields):
        with self._cache.transact():
            rec = self._cache.get(self._k(run_id, "meta"))
            if rec is None or any(rec.get(k) != v for k, v in expect.items()):
                return None
            rec = dict(rec, **fields)
            self._cache.set(self._k(run_id, "meta"), rec)
        return rec

    def lock(self, name, seconds=10.0):
        import diskcache

        return diskcache.Lock(self._cache, f"lock:{name}", expire=seconds)

    def list_runs(self, limit=200):
        out = []
        for run_id in self._cache.get("runs:index", [])[:limit]:
            rec = self.get_run(run_id)
            if rec is not None:
                out.append(rec)
        return out

    def delete_run(self, run_id):
        with self._cache.transact():
            n = self._cache.get(self._k(run_id, "draws:n"), 0)
            for i in range(n):
                self._cache.delete(self._k(run_id, f"draws:{i}"))
            for part in ("meta", "series", "snapshot", "result", "stop", "heartbeat", "draws:n", "draws:names",
                         "claim:execute", "claim:release"):
                self._cache.delete(self._k(run_id, part))
            index = self._cache.get("runs:index", [])
            self._cache.set("runs:index", [r for r in index if r != run_id])

    def get_series(self, run_id):
        return self._cache.get(self._k(run_id, "series"))

    def put_snapshot(self, run_id, snapshot):
        self._cache.set(self._k(run_id, "snapshot"), snapshot)

    def get_snapshot(self, run_id):
        return self._cache.get(self._k(run_id, "snapshot"))

    def put_result(self, run_id, result):
        self._cache.set(self._k(run_id, "result"), result)

    def get_result(self, run_id):
        return self._cache.get(self._k(run_id, "result"))

    def reset_draws(self, run_id, chains, names):
        with self._cache.transact():
            n = self._cache.get(self._k(run_id, "draws:n"), 0)
            for i in range(n):
                self._cache.delete(self._k(run_id, f"draws:{i}"))
            self._cache.set(self._k(run_id, "draws:n"), 0)
            self._cache.set(self._k(run_id, "draws:names"), {"chains": int(chains), "names": list(names)})

    def append_draws(self, run_id, positions, log_density):
        pos = np.ascontiguousarray(positions, dtype=float)
        lp = np.ascontiguousarray(log_density, dtype=float)
        with self._cache.transact():
            n = self._cache.get(self._k(run_id, "draws:n"), 0)
            self._cache.set(self._k(run_id, f"draws:{n}"), (pos, lp))
            self._cache.set(self._k(run_id, "draws:n"), n + 1)

    def read_draws(self, run_id):
        meta = self._cache.get(self._k(run_id, "draws:names"))
        n = self._cache.get(self._k(run_id, "draws:n"), 0)
        blocks = [self._cache.get(self._k(run_id, f"draws:{i}")) for i in range(n)]
        blocks = [b for b in blocks if b is not None]
        if not blocks:
            chains = meta["chains"] if meta else 0
            dim = len(meta["names"]) if meta else 0
            return np.empty((chains, 0, dim)), np.empty((chains, 0))
        return (np.concatenate([b[0] for b in blocks], axis=1),
                np.concatenate([b[1] for b in blocks], axis=1))

    def request_stop(self, run_id):
        self._cache.set(self._k(run_id, "stop"), True)

    def stop_requested(self, run_id):
        return bool(self._cache.get(self._k(run_id, "stop"), False))

    def heartbeat(self, run_id, when):
        self._cache.set(self._k(run_id, "heartbeat"), float(when))

    def last_heartbeat(self, run_id):
        return self._cache.get(self._k(run_id, "heartbeat"))

    def claim(self, run_id, what):
        return bool(self._cache.add(self._k(run_id, f"claim:{what}"), True))

    def put_upload(self, key, data, ttl_seconds=86400):
        self._cache.set(f"upload:{key}", data, expire=ttl_seconds)

    def get_upload(self, key):
        return self._cache.get(f"upload:{key}")

    def ping(self):
        try:
            self._cache.get("runs:index")
            return True
        except Exception:  # a broken folder: the caller reports it
            return False

    def close(self):
        self._cache.close()
