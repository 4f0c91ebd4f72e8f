"""Sign-in accounts, API tokens and sign-in throttling, kept in Redis.

Only salted password hashes are stored (werkzeug's ``generate_password_hash``),
never a password; only the SHA-256 of a token is stored, never the token.
Keys, under the same prefix as the run store (default ``bendline:``):

``{p}users``
    Set of user names.
``{p}user:{name}``
    Hash: ``name``, ``admin`` ("1"/"0"), ``created_at``, ``password_hash``
    and ``uid`` (random; a token names the uid it was made for, so a token
    of a removed user never works for a new user of the same name).
``{p}token:{sha256}`` and ``{p}user-tokens:{name}``
    Hash ``name``, ``uid``, ``created_at`` per token; set of a user's token
    hashes (for :meth:`UserStore.revoke_tokens`).
``{p}throttle:name:{h}`` / ``{p}throttle:ip:{h}``
    Sorted sets of recent sign-in failures (scores are times), ``h`` a hash
    of the name or address so any input makes a short key.
``{p}secret-key``
    The Flask secret key all web processes share.

Throttling numbers (common practice, no source): after
:data:`FREE_FAILURES` failed sign-ins within :data:`WINDOW_SECONDS` for one
name or from one address, each further attempt must wait
``2 ** (failures - FREE_FAILURES)`` seconds after the last failure, capped at
:data:`MAX_WAIT_SECONDS`.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import math
import re
import secrets
import time

import redis
from werkzeug.security import check_password_hash, generate_password_hash

from ..store.redis_store import DEFAULT_PREFIX, connect, guarded, redacted_url

NAME = re.compile(r"^[A-Za-z0-9._-]{1,64}$")
MIN_PASSWORD = 10
MAX_PASSWORD = 1024
TOKEN_BYTES = 32

#: Failures allowed without waiting (common practice, no source).
FREE_FAILURES = 5
#: Failures older than this no longer count (15 minutes; common practice, no source).
WINDOW_SECONDS = 15 * 60
#: The longest wait asked for (common practice, no source).
MAX_WAIT_SECONDS = 300
#: Failures remembered per name or address (enough to reach the cap).
_KEEP_FAILURES = 64


class UserError(ValueError):
    """A request about users that cannot be done (bad name, short password, duplicate...)."""


class UnknownUser(UserError):
    """No user has this name."""


def now_iso():
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def check_name(name):
    """Raise :class:`UserError` unless ``name`` is 1-64 letters, digits, ``.``, ``_`` or ``-``."""
    if not isinstance(name, str) or not NAME.match(name):
        shown = repr(name) if isinstance(name, str) and len(name) <= 80 else "that name"
        raise UserError(f"{shown} is not a usable user name: use 1 to 64 letters, digits, '.', '_' or '-'")


def check_password(password):
    """Raise :class:`UserError` unless the password has 10 to 1024 characters."""
    if not isinstance(password, str) or len(password) < MIN_PASSWORD:
        raise UserError(f"the password must have at least {MIN_PASSWORD} characters")
    if len(password) > MAX_PASSWORD:
        raise UserError(f"the password must have at most {MAX_PASSWORD} characters")


def _text(v):
    return v.decode("utf-8") if isinstance(v, bytes) else v


def _hash_key(value):
    return hashlib.sha256(str(value).encode("utf-8", "replace")).hexdigest()[:32]


def token_digest(token):
    """The SHA-256 (hex) under which a token is stored."""
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def wait_after(failures, last_failure, now):
    """Seconds still to wait after ``failures`` recent failures, the last at ``last_failure``.

    Returns
    -------
    float
        0 below :data:`FREE_FAILURES`; else ``2 ** (failures - 5)`` seconds
        (at most :data:`MAX_WAIT_SECONDS`) after the last failure, minus the
        time already passed.
    """
    if failures < FREE_FAILURES:
        return 0.0
    wait = min(MAX_WAIT_SECONDS, 2.0 ** (failures - FREE_FAILURES))
    return max(0.0, last_failure + wait - now)


class UserStore:
    """Users, tokens and sign-in throttling in Redis.

    Parameters
    ----------
    redis_url_or_client : str or redis.Redis
        A Redis URL, or an open redis-py client (bytes or text replies).
    prefix : str
        Key prefix, the same as the run store's.
    clock : callable
        Wall-clock seconds (tests pass a fake one for the throttle).

    Raises
    ------
    app.store.redis_store.StoreUnavailable
        From every method, when Redis cannot be reached.
    """

    def __init__(self, redis_url_or_client, prefix=DEFAULT_PREFIX, *, clock=time.time, socket_timeout=3.0):
        if isinstance(redis_url_or_client, str):
            self._r = connect(redis_url_or_client, socket_timeout=socket_timeout)
            self.safe_url = redacted_url(redis_url_or_client)
        else:
            self._r = redis_url_or_client
            kw = self._r.connection_pool.connection_kwargs
            where = kw.get("path") or f"{kw.get('host', 'localhost')}:{kw.get('port', 6379)}"
            self.safe_url = f"redis://{where}/{kw.get('db', 0)}"
        self.prefix = prefix
        self.clock = clock
        self._dummy_hash = None

    # keys
    def _user(self, name):
        return f"{self.prefix}user:{name}"

    def _tokens_of(self, name):
        return f"{self.prefix}user-tokens:{name}"

    def _token(self, digest):
        return f"{self.prefix}token:{digest}"

    @staticmethod
    def _public(raw):
        d = {_text(k): _text(v) for k, v in raw.items()}
        return {"name": d["name"], "admin": d.get("admin") == "1", "created_at": d.get("created_at")}

    # -- accounts
    @guarded
    def add(self, name, password, admin=False):
        """Add a user; returns its public record ``{"name", "admin", "created_at"}``.

        Raises
        ------
        UserError
            Bad name, password too short or too long, or the name is taken.
        """
        check_name(name)
        check_password(password)
        record = {"name": name, "admin": "1" if admin else "0", "created_at": now_iso(),
                  "password_hash": generate_password_hash(password), "uid": secrets.token_hex(8)}
        key = self._user(name)
        taken = UserError(f"a user named {name!r} already exists")
        with self._r.pipeline() as pipe:
            try:
                pipe.watch(key)
                if pipe.exists(key):
                    raise taken
                pipe.multi()
                pipe.hset(key, mapping=record)
                pipe.sadd(f"{self.prefix}users", name)
                pipe.execute()
            except redis.WatchError:
                raise taken from None
        return self._public(record)

    @guarded
    def get(self, name):
        """The public record of ``name``, or None (also for malformed names)."""
        if not isinstance(name, str) or not NAME.match(name):
            return None
        raw = self._r.hgetall(self._user(name))
        return self._public(raw) if raw else None

    @guarded
    def remove(self, name):
        """Remove a user and revoke its tokens; returns how many tokens were revoked.

        Raises
        ------
        UnknownUser
        """
        if self.get(name) is None:
            raise UnknownUser(f"there is no user named {name!r}")
        revoked = self.revoke_tokens(name)
        pipe = self._r.pipeline(transaction=True)
        pipe.delete(self._user(name))
        pipe.delete(self._sessions_of(name))  # every signed-in browser of this user is signed out
        pipe.srem(f"{self.prefix}users", name)
        pipe.execute()
        return revoked

    @guarded
    def list(self):
        """Every user's public record, sorted by name."""
        names = sorted(_text(n) for n in self._r.smembers(f"{self.prefix}users"))
        pipe = self._r.pipeline(transaction=False)
        for n in names:
            pipe.hgetall(self._user(n))
        return [self._public(raw) for raw in pipe.execute() if raw]

    @guarded
    def verify(self, name, password):
        """The user's public record when ``password`` is right, else None.

        An unknown name costs the same hash check as a known one, so the
        time taken does not tell which names exist.
        """
        if not isinstance(name, str) or not NAME.match(name) or not isinstance(password, str):
            return None
        if len(password) > MAX_PASSWORD:
            return None
        raw = self._r.hgetall(self._user(name))
        stored = _text(raw.get(b"password_hash", raw.get("password_hash"))) if raw else None
        if stored is None:
            if self._dummy_hash is None:
                self._dummy_hash = generate_password_hash(secrets.token_urlsafe(16))
            check_password_hash(self._dummy_hash, password)
            return None
        return self._public(raw) if check_password_hash(stored, password) else None

    # -- tokens
    @guarded
    def new_token(self, name):
        """A new random sign-in token for ``name`` (only its SHA-256 is stored).

        Returns
        -------
        str
            URL-safe text from 32 random bytes; it cannot be read back later.

        Raises
        ------
        UnknownUser
        """
        uid = self._r.hget(self._user(name), "uid") if isinstance(name, str) and NAME.match(name) else None
        if uid is None:
            raise UnknownUser(f"there is no user named {name!r}")
        token = secrets.token_urlsafe(TOKEN_BYTES)
        digest = token_digest(token)
        pipe = self._r.pipeline(transaction=True)
        pipe.hset(self._token(digest), mapping={"name": name, "uid": uid, "created_at": now_iso()})
        pipe.sadd(self._tokens_of(name), digest)
        pipe.execute()
        return token

    @guarded
    def user_for_token(self, token):
        """The public record of the token's user, or None (unknown, revoked, malformed)."""
        if not isinstance(token, str) or not 20 <= len(token) <= 200:
            return None
        raw = self._r.hgetall(self._token(token_digest(token)))
        if not raw:
            return None
        t = {_text(k): _text(v) for k, v in raw.items()}
        user = self._r.hgetall(self._user(t["name"]))
        if not user or _text(user.get(b"uid", user.get("uid"))) != t.get("uid"):
            return None
        return self._public(user)

    @guarded
    def revoke_tokens(self, name):
        """Revoke every token of ``name``; returns how many there were."""
        digests = [_text(d) for d in self._r.smembers(self._tokens_of(name))]
        pipe = self._r.pipeline(transaction=True)
        for d in digests:
            pipe.delete(self._token(d))
        pipe.delete(self._tokens_of(name))
        pipe.execute()
        return len(digests)

    # -- throttling
    def _throttle_keys(self, name, ip):
        """Failures are counted per name *from one address* and per address.

        Never per name alone: then five wrong passwords from anywhere would
        lock the owner out too, a lockout any stranger could trigger.
        """
        keys = []
        if name and ip:
            keys.append(f"{self.prefix}throttle:name-ip:{_hash_key(name + chr(0) + ip)}")
        if ip:
            keys.append(f"{self.prefix}throttle:ip:{_hash_key(ip)}")
        return keys

    @guarded
    def check_throttle(self, name, ip):
        """Seconds the next sign-in attempt for ``name`` from ``ip`` must wait (0: go ahead).

        Returns
        -------
        int
            The larger of the waits for the name and for the address, rounded up.
        """
        now = self.clock()
        keys = self._throttle_keys(name, ip)
        pipe = self._r.pipeline(transaction=False)
        for key in keys:
            pipe.zcount(key, now - WINDOW_SECONDS, "+inf")
            pipe.zrange(key, -1, -1, withscores=True)
        replies = pipe.execute()
        wait = 0.0
        for count, last in zip(replies[::2], replies[1::2]):
            if last:
                wait = max(wait, wait_after(count, last[0][1], now))
        return int(math.ceil(wait))

    @guarded
    def record_failure(self, name, ip):
        """Count one failed sign-in for ``name`` and for ``ip``."""
        now = self.clock()
        pipe = self._r.pipeline(transaction=True)
        for key in self._throttle_keys(name, ip):
            pipe.zadd(key, {f"{now!r}:{secrets.token_hex(4)}": now})
            pipe.zremrangebyscore(key, "-inf", now - WINDOW_SECONDS)
            pipe.zremrangebyrank(key, 0, -_KEEP_FAILURES - 1)
            pipe.expire(key, WINDOW_SECONDS + MAX_WAIT_SECONDS)
        pipe.execute()

    @guarded
    def clear_failures(self, name, ip):
        """Forget the failures of ``name`` and ``ip`` (after a successful sign-in)."""
        keys = self._throttle_keys(name, ip)
        if keys:
            self._r.delete(*keys)

    # -- sessions
    def _sessions_of(self, name):
        return f"{self.prefix}sessions:{name}"

    @guarded
    def start_session(self, name, hours):
        """A new server-side session id for ``name``, valid for ``hours`` unless ended."""
        sid = secrets.token_urlsafe(24)
        key = self._sessions_of(name)
        pipe = self._r.pipeline(transaction=True)
        pipe.sadd(key, sid)
        pipe.expire(key, int(hours * 3600) + 60)
        pipe.execute()
        return sid

    @guarded
    def session_valid(self, name, sid):
        """True while the session has not been ended (sign-out, user removed)."""
        if not isinstance(name, str) or not NAME.match(name) or not isinstance(sid, str) or not sid:
            return False
        return bool(self._r.sismember(self._sessions_of(name), sid))

    @guarded
    def end_session(self, name, sid):
        if isinstance(name, str) and NAME.match(name) and isinstance(sid, str):
            self._r.srem(self._sessions_of(name), sid)

    @guarded
    def get_secret_key(self):
        """The Flask secret key shared by every web process (made once, 32 random bytes)."""
        key = f"{self.prefix}secret-key"
        self._r.set(key, secrets.token_hex(32), nx=True)
        return bytes.fromhex(_text(self._r.get(key)))
