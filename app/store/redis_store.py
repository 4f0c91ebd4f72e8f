"""A run store on Redis: the team server's store.

The web server, its other processes and every Celery worker open the same
store from its URL (:attr:`RedisRunStore.location`). Layout, every key under
a prefix (default ``bendline:``) so other applications can share the Redis:

``{p}runs``
    Sorted set of run ids, scored by creation time (the Redis server's
    clock, so web processes with skewed clocks still list newest first).
``{p}run:{id}:meta``
    Hash, one field per record field, each value JSON. :meth:`update_run`
    writes only the fields it is given, in one Lua script that first checks
    that the run exists, so a worker and the web server updating the same
    record never lose each other's fields.
``{p}run:{id}:series`` / ``:snapshot`` / ``:result``
    JSON strings.
``{p}run:{id}:draws``
    List; each item one appended block, ``positions`` then ``log_density``
    in ``np.save`` format (raw float64 plus shape, ``allow_pickle=False``).
    One RPUSH per block, so appends are atomic.
``{p}run:{id}:draws:meta``
    JSON ``{"chains", "names"}`` written by :meth:`reset_draws`.
``{p}run:{id}:stop`` / ``:heartbeat``
    Stop flag; last heartbeat (seconds, as text).
``{p}run:{id}:claims``
    Hash of one-time steps already claimed (HSETNX, see :meth:`claim`).
``{p}upload:{key}``
    JSON with a time to live (``SET ... EX``).
``{p}worker:{name}`` and ``{p}workers``
    Worker presence: a JSON record with a time to live, and the set of names.

Nothing is pickled: values are JSON (bytes inside uploads are tagged base64)
and draws are raw float64 arrays, so a shared Redis cannot make a process
run code by planting a value.

When Redis cannot be reached every method except :meth:`RedisRunStore.ping`
raises :class:`StoreUnavailable`, whose message names the URL without any
password in it.
"""

from __future__ import annotations

import base64
import functools
import io
import json
import math
import time
from urllib.parse import parse_qsl, urlencode, urlsplit, urlunsplit

import numpy as np
import redis
from redis.backoff import NoBackoff
from redis.retry import Retry

from . import BadRedisUrl, RunStore, StoreUnavailable

DEFAULT_PREFIX = "bendline:"
_BYTES_TAG = "__bendline_bytes__"
_RUN_PARTS = ("meta", "series", "snapshot", "result", "stop", "heartbeat", "draws", "draws:meta", "claims")

# Merge fields into an existing record hash; nothing when the run is absent.
_UPDATE_LUA = """
if redis.call('EXISTS', KEYS[1]) == 0 then return false end
if #ARGV > 0 then redis.call('HSET', KEYS[1], unpack(ARGV)) end
return redis.call('HGETALL', KEYS[1])
"""

# Merge fields only while the record holds the expected values (ARGV[1] = how
# many expected pairs follow, then those pairs, then the fields to set).
_UPDATE_IF_LUA = """
if redis.call('EXISTS', KEYS[1]) == 0 then return false end
local n = tonumber(ARGV[1])
for i = 0, n - 1 do
  if redis.call('HGET', KEYS[1], ARGV[2 + 2 * i]) ~= ARGV[3 + 2 * i] then return false end
end
local set = {}
for i = 2 + 2 * n, #ARGV do table.insert(set, ARGV[i]) end
if #set > 0 then redis.call('HSET', KEYS[1], unpack(set)) end
return redis.call('HGETALL', KEYS[1])
"""

# Live worker records; names whose record expired leave the set (atomically,
# so a worker registering meanwhile is never dropped).
_WORKERS_LUA = """
local out = {}
for _, name in ipairs(redis.call('SMEMBERS', KEYS[1])) do
  local v = redis.call('GET', ARGV[1] .. name)
  if v then table.insert(out, v) else redis.call('SREM', KEYS[1], name) end
end
return out
"""


# -- URLs

def redacted_url(url):
    """``url`` with any user name, password or ``password=`` option replaced by ``***``.

    Parameters
    ----------
    url : str

    Returns
    -------
    str
        Safe to print, log or show in a page.
    """
    try:
        parts = urlsplit(str(url))
        netloc = parts.netloc
        if "@" in netloc:
            netloc = "***@" + netloc.rpartition("@")[2]
        query = parts.query
        if query:
            pairs = parse_qsl(query, keep_blank_values=True)
            query = urlencode([(k, "***" if k.lower() in ("password", "username") else v) for k, v in pairs])
        if netloc == parts.netloc and query == parts.query:
            return str(url)
        return urlunsplit((parts.scheme, netloc, parts.path, query, parts.fragment))
    except (ValueError, TypeError):
        return "the Redis URL (unreadable)"


def split_prefix(url):
    """Split a ``prefix=`` option off a Redis URL.

    Returns
    -------
    (str, str or None)
        The URL redis-py gets, and the key prefix it named (None if none).
    """
    parts = urlsplit(url)
    pairs = parse_qsl(parts.query, keep_blank_values=True)
    if not any(k == "prefix" for k, _ in pairs):
        return url, None
    prefix = [v for k, v in pairs if k == "prefix"][-1]
    rest = urlencode([(k, v) for k, v in pairs if k != "prefix"])
    return urlunsplit((parts.scheme, parts.netloc, parts.path, rest, parts.fragment)), prefix


def connect(url, *, socket_timeout=3.0):
    """A redis-py client for ``url`` that fails fast when Redis is away.

    One immediate retry (so a connection dropped by a Redis restart is
    re-opened transparently), no back-off: an unreachable Redis costs at most
    about ``2 * socket_timeout`` seconds per call.

    Raises
    ------
    BadRedisUrl
        When redis-py cannot parse the URL.
    """
    if not isinstance(url, str) or not url.startswith(("redis://", "rediss://", "unix://")):
        raise BadRedisUrl(f"{redacted_url(url)} is not a Redis URL; it should look like redis://HOST:6379/0")
    try:
        return redis.Redis.from_url(
            url, socket_timeout=socket_timeout, socket_connect_timeout=socket_timeout,
            retry=Retry(NoBackoff(), 1), decode_responses=False,
        )
    except (ValueError, TypeError) as exc:
        raise BadRedisUrl(f"the Redis URL {redacted_url(url)} cannot be used: {exc}") from None


def unavailable(exc, safe_url):
    """The :class:`StoreUnavailable` for a redis-py error, or None if it is not about reachability."""
    if isinstance(exc, redis.exceptions.AuthenticationError):
        return StoreUnavailable(f"Redis at {safe_url} refused the user name or password in the URL")
    if isinstance(exc, redis.exceptions.BusyLoadingError):
        return StoreUnavailable(f"Redis at {safe_url} is still loading its data; try again in a moment")
    if isinstance(exc, redis.exceptions.TimeoutError):
        return StoreUnavailable(f"Redis at {safe_url} did not answer in time ({exc})")
    if isinstance(exc, (redis.exceptions.ConnectionError, OSError)):
        return StoreUnavailable(f"cannot reach Redis at {safe_url} ({exc})")
    if isinstance(exc, redis.exceptions.ResponseError):
        text = str(exc)
        if text.startswith(("OOM", "READONLY", "MISCONF", "NOAUTH", "NOPERM", "LOADING", "MASTERDOWN")):
            return StoreUnavailable(f"Redis at {safe_url} refused the command: {text}")
    return None


def guarded(method):
    """Decorator: redis-py reachability errors become :class:`StoreUnavailable`.

    The instance must have a ``safe_url`` attribute.
    """

    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except (redis.exceptions.RedisError, OSError) as exc:
            if isinstance(exc, StoreUnavailable):
                raise
            err = unavailable(exc, self.safe_url)
            if err is None:
                raise
            raise err from exc

    return wrapper


# -- values

def _json_default(obj):
    if isinstance(obj, (bytes, bytearray, memoryview)):
        return {_BYTES_TAG: base64.b64encode(bytes(obj)).decode("ascii")}
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.generic):
        return obj.item()
    raise TypeError(f"a {type(obj).__name__} cannot be kept in the run store (JSON values only)")


def _json_hook(d):
    if len(d) == 1 and _BYTES_TAG in d:
        return base64.b64decode(d[_BYTES_TAG])
    return d


def dumps(obj):
    """JSON bytes for a store value (bytes become tagged base64, numpy values plain numbers)."""
    return json.dumps(obj, default=_json_default, separators=(",", ":")).encode("utf-8")


def loads(data):
    """The value :func:`dumps` wrote (None for None)."""
    return None if data is None else json.loads(data, object_hook=_json_hook)


def pack_draws(positions, log_density):
    """One draws block as bytes: two ``np.save`` arrays (float64, no pickle)."""
    pos = np.ascontiguousarray(positions, dtype=np.float64)
    lp = np.ascontiguousarray(log_density, dtype=np.float64)
    if pos.ndim != 3 or lp.shape != pos.shape[:2]:
        raise ValueError(f"draws must be positions (chains, draws, dim) and log density (chains, draws); "
                         f"got shapes {pos.shape} and {lp.shape}")
    buf = io.BytesIO()
    np.save(buf, pos, allow_pickle=False)
    np.save(buf, lp, allow_pickle=False)
    return buf.getvalue()


def unpack_draws(data):
    """(positions, log_density) from :func:`pack_draws` bytes."""
    buf = io.BytesIO(data)
    return np.load(buf, allow_pickle=False), np.load(buf, allow_pickle=False)


def _pairs(flat):
    """A record dict from a flat HGETALL reply (list) or a dict reply."""
    items = flat.items() if isinstance(flat, dict) else zip(flat[::2], flat[1::2])
    return {(k.decode() if isinstance(k, bytes) else k): loads(v) for k, v in items}


class RedisRunStore(RunStore):
    """Run store on Redis (redis-py).

    Parameters
    ----------
    url : str
        ``redis://[:PASSWORD@]HOST:PORT/DB`` (or ``rediss://``, ``unix://``).
        An optional ``prefix=`` query option sets the key prefix; it is
        removed before the URL reaches redis-py.
    socket_timeout : float
        Seconds to wait for Redis to connect or answer.
    prefix : str, optional
        Key prefix (default ``bendline:`` or the URL's ``prefix=``). A
        non-default prefix is added to :attr:`location` so worker processes
        opening that location use the same keys.

    Attributes
    ----------
    location : str
        The URL to open this store again (:func:`app.store.open_store`); it
        may hold a password, so show :attr:`safe_url` instead.
    safe_url : str
        The URL without credentials, for messages.
    prefix : str
    """

    def __init__(self, url, *, socket_timeout=3.0, prefix=None):
        if not isinstance(url, str):
            raise BadRedisUrl("the Redis URL must be text, like redis://HOST:6379/0")
        client_url, url_prefix = split_prefix(url)
        if prefix is not None and url_prefix is not None and prefix != url_prefix:
            raise BadRedisUrl(f"the key prefix {prefix!r} differs from the URL's prefix={url_prefix!r}")
        self.prefix = prefix if prefix is not None else (url_prefix if url_prefix is not None else DEFAULT_PREFIX)
        self.location = url
        if url_prefix is None and self.prefix != DEFAULT_PREFIX:
            self.location = url + ("&" if "?" in url else "?") + urlencode({"prefix": self.prefix})
        self.safe_url = redacted_url(self.location)
        self.socket_timeout = socket_timeout
        self._r = connect(client_url, socket_timeout=socket_timeout)
        self._update = self._r.register_script(_UPDATE_LUA)
        self._update_if = self._r.register_script(_UPDATE_IF_LUA)
        self._workers = self._r.register_script(_WORKERS_LUA)

    def __repr__(self):
        return f"RedisRunStore({self.safe_url!r})"

    # keys
    def _k(self, run_id, part):
        return f"{self.prefix}run:{run_id}:{part}"

    @property
    def _index(self):
        return f"{self.prefix}runs"

    # -- runs
    @guarded
    def create_run(self, record, series):
        run_id = record["id"]
        sec, usec = self._r.time()
        meta = self._k(run_id, "meta")
        pipe = self._r.pipeline(transaction=True)
        pipe.delete(meta)
        pipe.hset(meta, mapping={k: dumps(v) for k, v in record.items()})
        pipe.set(self._k(run_id, "series"), dumps(series))
        pipe.zadd(self._index, {run_id: sec + usec / 1e6})
        pipe.execute()

    @guarded
    def get_run(self, run_id):
        raw = self._r.hgetall(self._k(run_id, "meta"))
        return _pairs(raw) if raw else None

    @guarded
    def update_run(self, run_id, **fields):
        args = []
        for k, v in fields.items():
            args += [k, dumps(v)]
        raw = self._update(keys=[self._k(run_id, "meta")], args=args)
        return _pairs(raw) if raw else None

    @guarded
    def update_run_if(self, run_id, expect, **fields):
        args = [str(len(expect))]
        for k, v in expect.items():
            args += [k, dumps(v)]
        for k, v in fields.items():
            args += [k, dumps(v)]
        raw = self._update_if(keys=[self._k(run_id, "meta")], args=args)
        return _pairs(raw) if raw else None

    def lock(self, name, seconds=10.0):
        return self._r.lock(f"{self.prefix}lock:{name}", timeout=seconds, blocking_timeout=seconds)

    @guarded
    def list_runs(self, limit=200):
        if limit <= 0:
            return []
        ids = self._r.zrevrange(self._index, 0, limit - 1)
        pipe = self._r.pipeline(transaction=False)
        for run_id in ids:
            pipe.hgetall(self._k(run_id.decode(), "meta"))
        return [_pairs(raw) for raw in pipe.execute() if raw]

    @guarded
    def delete_run(self, run_id):
        pipe = self._r.pipeline(transaction=True)
        pipe.delete(*[self._k(run_id, part) for part in _RUN_PARTS])
        pipe.zrem(self._index, run_id)
        pipe.execute()

    @guarded
    def get_series(self, run_id):
        return loads(self._r.get(self._k(run_id, "series")))

    # -- progress
    @guarded
    def put_snapshot(self, run_id, snapshot):
        self._r.set(self._k(run_id, "snapshot"), dumps(snapshot))

    @guarded
    def get_snapshot(self, run_id):
        return loads(self._r.get(self._k(run_id, "snapshot")))

    @guarded
    def put_result(self, run_id, result):
        self._r.set(self._k(run_id, "result"), dumps(result))

    @guarded
    def get_result(self, run_id):
        return loads(self._r.get(self._k(run_id, "result")))

    # -- draws
    @guarded
    def reset_draws(self, run_id, chains, names):
        pipe = self._r.pipeline(transaction=True)
        pipe.delete(self._k(run_id, "draws"))
        pipe.set(self._k(run_id, "draws:meta"), dumps({"chains": int(chains), "names": list(names)}))
        pipe.execute()

    @guarded
    def append_draws(self, run_id, positions, log_density):
        self._r.rpush(self._k(run_id, "draws"), pack_draws(positions, log_density))

    @guarded
    def read_draws(self, run_id):
        pipe = self._r.pipeline(transaction=True)
        pipe.get(self._k(run_id, "draws:meta"))
        pipe.lrange(self._k(run_id, "draws"), 0, -1)
        meta, items = pipe.execute()
        meta = loads(meta)
        if not items:
            chains = meta["chains"] if meta else 0
            dim = len(meta["names"]) if meta else 0
            return np.empty((chains, 0, dim)), np.empty((chains, 0))
        blocks = [unpack_draws(item) for item in items]
        return (np.concatenate([b[0] for b in blocks], axis=1),
                np.concatenate([b[1] for b in blocks], axis=1))

    # -- control
    @guarded
    def request_stop(self, run_id):
        self._r.set(self._k(run_id, "stop"), b"1")

    @guarded
    def stop_requested(self, run_id):
        return bool(self._r.exists(self._k(run_id, "stop")))

    @guarded
    def heartbeat(self, run_id, when):
        self._r.set(self._k(run_id, "heartbeat"), repr(float(when)))

    @guarded
    def last_heartbeat(self, run_id):
        raw = self._r.get(self._k(run_id, "heartbeat"))
        return None if raw is None else float(raw)

    @guarded
    def claim(self, run_id, what):
        """Claim the one-time step ``what`` of a run; True for the first caller only (HSETNX)."""
        return bool(self._r.hsetnx(self._k(run_id, "claims"), str(what), b"1"))

    # -- uploads
    @guarded
    def put_upload(self, key, data, ttl_seconds=86400):
        self._r.set(f"{self.prefix}upload:{key}", dumps(data), ex=max(1, math.ceil(ttl_seconds)))

    @guarded
    def get_upload(self, key):
        return loads(self._r.get(f"{self.prefix}upload:{key}"))

    # -- workers
    @guarded
    def register_worker(self, name, info, ttl_seconds):
        """Record that worker ``name`` is alive for the next ``ttl_seconds``.

        Parameters
        ----------
        name : str
        info : dict
            JSON-safe facts about the worker (version, concurrency, host...).
        ttl_seconds : float
            The record disappears unless renewed within this time.
        """
        record = dict(info, name=name, last_seen=time.time())
        pipe = self._r.pipeline(transaction=True)
        pipe.set(f"{self.prefix}worker:{name}", dumps(record), px=max(1, int(ttl_seconds * 1000)))
        pipe.sadd(f"{self.prefix}workers", name)
        pipe.execute()

    @guarded
    def list_workers(self):
        """Records of the workers whose presence has not expired, sorted by name.

        Returns
        -------
        list of dict
            Each the ``info`` given to :meth:`register_worker` plus ``name``
            and ``last_seen`` (seconds since the epoch, the worker's clock).
        """
        raw = self._workers(keys=[f"{self.prefix}workers"], args=[f"{self.prefix}worker:"])
        return sorted((loads(v) for v in raw), key=lambda w: str(w.get("name")))

    # -- liveness
    def ping(self):
        """True when Redis answers; False (never an exception) when it cannot be reached."""
        try:
            return bool(self._r.ping())
        except (redis.exceptions.RedisError, OSError):
            return False

    def close(self):
        """Close the connections (the store can still be used; it reconnects)."""
        self._r.close()
