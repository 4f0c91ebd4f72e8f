"""One contract for every run store (diskcache now; Redis joins in team mode)."""

from __future__ import annotations

import numpy as np
import pytest

from app.store import StoreSink, open_store, valid_run_id
from app.store.disk import DiskRunStore


def _disk(tmp_path):
    return DiskRunStore(str(tmp_path / "store"))


FACTORIES = {"disk": _disk}


def pytest_generate_tests(metafunc):
    if "store" in metafunc.fixturenames:
        metafunc.parametrize("store", sorted(FACTORIES), indirect=True)


@pytest.fixture
def store(request, tmp_path):
    return FACTORIES[request.param](tmp_path)


def _record(run_id, **kw):
    rec = {"id": run_id, "status": "queued", "owner": "ana", "options": {"segments": 2}}
    rec.update(kw)
    return rec


def test_runs_round_trip_and_list_newest_first(store):
    store.create_run(_record("a" * 16), {"values": [1, 2]})
    store.create_run(_record("b" * 16), {"values": [3]})
    assert store.get_run("a" * 16)["owner"] == "ana"
    assert [r["id"] for r in store.list_runs()] == ["b" * 16, "a" * 16]
    assert store.get_series("b" * 16) == {"values": [3]}
    rec = store.update_run("a" * 16, status="running", worker="w1")
    assert rec["status"] == "running" and rec["owner"] == "ana"
    assert store.get_run("a" * 16)["worker"] == "w1"
    assert store.update_run("c" * 16, status="x") is None
    assert store.get_run("c" * 16) is None


def test_snapshot_and_result_replace(store):
    rid = "1" * 16
    store.create_run(_record(rid), {})
    assert store.get_snapshot(rid) is None
    store.put_snapshot(rid, {"iteration": 1})
    store.put_snapshot(rid, {"iteration": 2})
    assert store.get_snapshot(rid) == {"iteration": 2}
    store.put_result(rid, {"schema_version": 1})
    assert store.get_result(rid) == {"schema_version": 1}


def test_draws_follow_the_sink_contract(store, rng):
    rid = "2" * 16
    store.create_run(_record(rid), {})
    sink = StoreSink(store, rid)
    sink.reset(3, ["a", "b"])
    pos, lp = sink.read()
    assert pos.shape == (3, 0, 2)
    blocks = [rng.normal(size=(3, k, 2)) for k in (4, 1, 30)]
    for b in blocks:
        sink.append(b, b[..., 1])
    pos, lp = sink.read()
    np.testing.assert_array_equal(pos, np.concatenate(blocks, axis=1))
    np.testing.assert_array_equal(lp, np.concatenate(blocks, axis=1)[..., 1])
    assert sink.draws == 35
    sink.reset(3, ["a", "b"])
    assert store.read_draws(rid)[0].shape == (3, 0, 2)


def test_stop_flag_heartbeat_and_delete(store):
    rid = "3" * 16
    store.create_run(_record(rid), {"v": 1})
    assert not store.stop_requested(rid)
    store.request_stop(rid)
    assert store.stop_requested(rid)
    assert store.last_heartbeat(rid) is None
    store.heartbeat(rid, 123.5)
    assert store.last_heartbeat(rid) == 123.5
    store.put_snapshot(rid, {"x": 1})
    store.delete_run(rid)
    assert store.get_run(rid) is None and store.get_snapshot(rid) is None
    assert store.get_series(rid) is None
    assert rid not in [r["id"] for r in store.list_runs()]


def test_claims_go_to_the_first_caller_only(store):
    rid = "5" * 16
    store.create_run(_record(rid), {})
    assert store.claim(rid, "execute") is True
    assert store.claim(rid, "execute") is False
    assert store.claim(rid, "release") is True
    store.delete_run(rid)
    store.create_run(_record(rid), {})
    assert store.claim(rid, "execute") is True  # a deleted run's claims go with it


def test_uploads_and_ping(store):
    store.put_upload("k1", {"series": [1]})
    assert store.get_upload("k1") == {"series": [1]}
    assert store.get_upload("nope") is None
    assert store.ping()


def test_a_second_handle_sees_the_same_runs(store):
    other = open_store(store.location)
    store.create_run(_record("4" * 16), {})
    assert other.get_run("4" * 16)["id"] == "4" * 16


def test_run_ids_are_checked_before_lookups():
    assert valid_run_id("0123456789abcdef")
    for bad in ("../etc/passwd", "0123456789ABCDEF", "0123", "", None, 5, "0123456789abcdef0"):
        assert not valid_run_id(bad)
