"""Team-mode users, tokens, sign-in throttling and the shared secret key, on a real Redis."""

from __future__ import annotations

import hashlib

import pytest
import redis

from bendline.app.store.redis_store import StoreUnavailable
from bendline.app.team.users import MAX_WAIT_SECONDS, UnknownUser, UserError, UserStore, wait_after

from .redis_server import free_port

PASSWORD = "correct horse battery"


class Clock:
    """A hand-moved clock for the throttle."""

    def __init__(self, t=1_000_000.0):
        self.t = t

    def __call__(self):
        return self.t


@pytest.fixture
def users(redis_url):
    return UserStore(redis_url)


def _everything(redis_url):
    """Every key and value in Redis, as bytes, to look for secrets."""
    r = redis.Redis.from_url(redis_url)
    out = []
    for key in r.scan_iter():
        out.append(key)
        kind = r.type(key)
        if kind == b"string":
            out.append(r.get(key))
        elif kind == b"hash":
            for k, v in r.hgetall(key).items():
                out += [k, v]
        elif kind == b"set":
            out += list(r.smembers(key))
        elif kind == b"zset":
            out += [m for m, _ in r.zrange(key, 0, -1, withscores=True)]
    return b"\n".join(out)


def test_add_list_verify(users):
    ana = users.add("ana", PASSWORD, admin=True)
    users.add("bo.b-2_x", PASSWORD + "!")
    assert ana["name"] == "ana" and ana["admin"] is True and ana["created_at"]
    assert [(u["name"], u["admin"]) for u in users.list()] == [("ana", True), ("bo.b-2_x", False)]
    assert set(users.list()[0]) == {"name", "admin", "created_at"}
    assert users.verify("ana", PASSWORD)["admin"] is True
    assert users.verify("ana", PASSWORD + "x") is None
    assert users.verify("ana", "") is None
    assert users.verify("nobody", PASSWORD) is None
    assert users.verify("../ana", PASSWORD) is None
    assert users.get("bo.b-2_x")["admin"] is False and users.get("nobody") is None


def test_only_a_salted_hash_is_stored(users, redis_url):
    users.add("ana", PASSWORD)
    users.add("bob", PASSWORD)  # same password, different salt
    r = redis.Redis.from_url(redis_url)
    h1 = r.hget("bendline:user:ana", "password_hash")
    h2 = r.hget("bendline:user:bob", "password_hash")
    assert h1 != h2 and PASSWORD.encode() not in h1
    assert PASSWORD.encode() not in _everything(redis_url)


@pytest.mark.parametrize("name", ["", "a" * 65, "ana smith", "ana:x", "ana/..", "é", None, 7])
def test_bad_names_are_refused(users, name):
    with pytest.raises(UserError, match="not a usable user name"):
        users.add(name, PASSWORD)


def test_short_password_and_duplicates_are_refused(users):
    with pytest.raises(UserError, match="at least 10 characters"):
        users.add("ana", "123456789")
    assert users.list() == []
    users.add("ana", PASSWORD)
    with pytest.raises(UserError, match="already exists"):
        users.add("ana", PASSWORD + "2", admin=True)
    assert users.verify("ana", PASSWORD)["admin"] is False  # the first one stays


def test_remove(users):
    users.add("ana", PASSWORD)
    users.remove("ana")
    assert users.list() == [] and users.verify("ana", PASSWORD) is None
    with pytest.raises(UnknownUser, match="no user named 'ana'"):
        users.remove("ana")


def test_tokens_store_only_their_hash_and_can_be_revoked(users, redis_url):
    users.add("ana", PASSWORD)
    t1, t2 = users.new_token("ana"), users.new_token("ana")
    assert t1 != t2 and len(t1) >= 43
    assert all(c.isalnum() or c in "-_" for c in t1)  # URL-safe
    assert users.user_for_token(t1)["name"] == "ana" and users.user_for_token(t2)["name"] == "ana"
    stored = _everything(redis_url)
    assert t1.encode() not in stored and hashlib.sha256(t1.encode()).hexdigest().encode() in stored
    assert users.revoke_tokens("ana") == 2
    assert users.user_for_token(t1) is None and users.user_for_token(t2) is None


@pytest.mark.parametrize("token", [None, "", "short", "x" * 43, "y" * 5000, 12])
def test_unknown_or_malformed_tokens_find_nobody(users, token):
    users.add("ana", PASSWORD)
    users.new_token("ana")
    assert users.user_for_token(token) is None


def test_a_removed_users_tokens_do_not_work_for_a_new_user_of_that_name(users):
    users.add("ana", PASSWORD, admin=True)
    old = users.new_token("ana")
    users.remove("ana")
    assert users.user_for_token(old) is None
    users.add("ana", PASSWORD)
    assert users.user_for_token(old) is None
    with pytest.raises(UnknownUser):
        users.new_token("nobody")


def test_wait_grows_after_five_failures_and_is_capped():
    assert [wait_after(n, 0.0, 0.0) for n in range(4, 9)] == [0.0, 1.0, 2.0, 4.0, 8.0]
    assert wait_after(30, 0.0, 0.0) == MAX_WAIT_SECONDS == 300
    assert wait_after(7, 100.0, 103.0) == 1.0


def test_a_stranger_cannot_lock_the_owner_out(redis_url):
    clock = Clock()
    users = UserStore(redis_url, clock=clock)
    for i in range(30):  # wrong passwords for ana from many other addresses
        users.record_failure("ana", f"10.0.0.{i}")
    assert users.check_throttle("ana", "10.0.9.9") == 0  # ana from her own address is not slowed
    for _ in range(5):  # the 5th failure of one name from one address slows that pair
        users.record_failure("ana", "10.0.1.1")
    assert users.check_throttle("ana", "10.0.1.1") == 1
    assert users.check_throttle("ana", "10.0.9.9") == 0
    clock.t += 1
    assert users.check_throttle("ana", "10.0.1.1") == 0
    for _ in range(20):
        users.record_failure("ana", "10.0.1.1")
    assert users.check_throttle("ana", "10.0.1.1") == 300
    clock.t += 299.5
    assert users.check_throttle("ana", "10.0.1.1") == 1
    clock.t += 16 * 60  # every failure is now older than the window
    assert users.check_throttle("ana", "10.0.1.1") == 0


def test_throttle_by_address_and_clearing(redis_url):
    clock = Clock()
    users = UserStore(redis_url, clock=clock)
    for i in range(6):
        users.record_failure(f"guess{i}", "192.0.2.7")  # one address trying many names
    assert users.check_throttle("someone-new", "192.0.2.7") == 2
    assert users.check_throttle("someone-new", "192.0.2.8") == 0
    users.clear_failures("someone-new", "192.0.2.7")
    assert users.check_throttle("someone-new", "192.0.2.7") == 0
    assert users.check_throttle("guess1", None) == 0  # one failure per name only


def test_failures_are_remembered_for_a_bounded_time(redis_url):
    users = UserStore(redis_url)
    users.record_failure("ana", "192.0.2.1")
    r = redis.Redis.from_url(redis_url)
    keys = list(r.scan_iter("bendline:throttle:*"))
    assert len(keys) == 2 and all(0 < r.ttl(k) <= 20 * 60 for k in keys)
    assert b"ana" not in b"".join(keys) and b"192.0.2.1" not in b"".join(keys)


def test_secret_key_is_made_once_and_shared(redis_url):
    first = UserStore(redis_url).get_secret_key()
    second = UserStore(redis.Redis.from_url(redis_url, decode_responses=True)).get_secret_key()
    assert isinstance(first, bytes) and len(first) >= 32 and first == second
    assert UserStore(redis_url, prefix="other:").get_secret_key() != first


def test_a_client_with_text_replies_works_too(redis_url):
    users = UserStore(redis.Redis.from_url(redis_url, decode_responses=True))
    users.add("ana", PASSWORD)
    token = users.new_token("ana")
    assert users.verify("ana", PASSWORD)["name"] == "ana" and users.user_for_token(token)["name"] == "ana"


def test_unreachable_redis_raises_store_unavailable():
    users = UserStore(f"redis://:s3cret-pw@127.0.0.1:{free_port()}/0", socket_timeout=0.5)
    with pytest.raises(StoreUnavailable) as info:
        users.verify("ana", PASSWORD)
    assert "127.0.0.1" in str(info.value) and "s3cret" not in str(info.value)
    with pytest.raises(StoreUnavailable):
        users.check_throttle("ana", "192.0.2.1")
