"""The JSON API: submit, read, list and stop runs; every refusal is a clear 4xx in JSON."""

from __future__ import annotations

import io
import json
import os

import pytest
from flask import g

from bendline.app import cli
from bendline.app.api import register_api
from bendline.app.executors import InlineExecutor
from bendline.app.runs import RunService
from bendline.app.store import valid_run_id
from bendline.app.store.disk import DiskRunStore
from bendline.app.web import create_app
from bendline.app.web.context import AppServices
from bendline.inference import reader

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_series")
DAILY = os.path.join(SAMPLES, "daily_admissions.csv")
LONG = os.path.join(SAMPLES, "regions_long.csv")

FAST = {"segments": 2, "chains": 4, "draws": 100, "seed": 3}
# Keys of the JSON result that scripts and batch jobs read (as in test_cli_fit).
TOP_KEYS = {"schema_version", "series", "spec", "seed", "diagnostics", "changepoints", "segments",
            "current", "band", "projection", "data_quality"}


def _text(path):
    with open(path, encoding="utf-8") as fh:
        return fh.read()


@pytest.fixture
def make_app(tmp_path):
    """Build the dashboard's Flask server with the API; ``user`` sets the signed-in user."""

    def build(user=None, executor=None):
        store = DiskRunStore(str(tmp_path / "runs"))
        runs = RunService(store, executor if executor is not None else InlineExecutor(store))
        services = AppServices(runs=runs, store=store, team=user is not None)
        dash_app = create_app(services)
        server = dash_app.server
        signed_in = {"user": user}

        @server.before_request
        def sign_in():  # what the team sign-in layer does before a request reaches the API
            if signed_in["user"] is not None:
                g.bendline_user = dict(signed_in["user"])

        register_api(server)
        client = server.test_client()
        # what the dashboard's and scripts' cookie-signed API writes send (app.web.security)
        client.environ_base["HTTP_X_BENDLINE_REQUEST"] = "1"
        client.signed_in = signed_in
        client.services = services
        return client

    return build


def _post_json(client, csv_text, spec=None, **extra):
    return client.post("/api/v1/runs", json={"csv": csv_text, "spec": spec or {}, **extra})


def _assert_clean_error(response, status, tmp_path=None):
    """A JSON error with a message, no traceback and no server path."""
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    body = response.get_json()
    assert isinstance(body["error"]["message"], str) and body["error"]["message"]
    text = response.get_data(as_text=True)
    assert "Traceback" not in text and 'File "' not in text and ROOT not in text
    if tmp_path is not None:
        assert str(tmp_path) not in text
    return body["error"]


# --------------------------------------------------------------------------
# Submitting and reading runs


def test_json_post_fits_and_get_returns_the_result(make_app, tmp_path):
    client = make_app()
    r = _post_json(client, _text(DAILY), FAST)
    assert r.status_code == 201, r.get_json()
    body = r.get_json()
    run_id = body["id"]
    assert valid_run_id(run_id)
    assert body["url"] == f"/api/v1/runs/{run_id}" and body["view"] == f"/?run={run_id}"
    assert r.headers["Location"] == body["url"]
    assert body["status"] in ("converged", "unconverged")  # the inline executor fitted it already

    got = client.get(body["url"])
    assert got.status_code == 200
    run = got.get_json()
    assert set(run) == {"id", "status", "reason", "owner", "created_at", "progress", "result"}
    assert run["id"] == run_id and run["owner"] == "local" and run["status"] == body["status"]
    assert run["progress"]["phase"] == "done"
    assert set(run["progress"]) == {"phase", "draws_per_chain", "rhat_max", "ess_min"}
    assert run["progress"]["draws_per_chain"] >= 100
    result = run["result"]
    assert TOP_KEYS <= set(result)
    assert result["run_id"] == run_id
    assert result["spec"] == FAST
    assert result["series"]["n"] == reader.read_series(DAILY).n and len(result["changepoints"]) == 1

    listed = client.get("/api/v1/runs").get_json()["runs"]
    assert [x["id"] for x in listed] == [run_id]
    assert set(listed[0]) == {"id", "status", "owner", "created_at", "series_name", "segments",
                              "converged", "reportable"}
    assert listed[0]["reportable"] == run["result"]["diagnostics"]["reportable"]
    assert listed[0]["segments"] == 2 and listed[0]["converged"] == (run["status"] == "converged")


def test_multipart_post_gives_the_same_result_as_bendline_fit(make_app, tmp_path):
    client = make_app()
    with open(DAILY, "rb") as fh:
        r = client.post("/api/v1/runs", data={"file": (fh, "daily_admissions.csv"),
                                              "spec": json.dumps(FAST)},
                        content_type="multipart/form-data")
    assert r.status_code == 201, r.get_json()
    api_result = client.get(r.get_json()["url"]).get_json()["result"]

    out = tmp_path / "fit.json"
    code = cli.main(["fit", DAILY, "--segments", "2", "--chains", "4", "--draws", "100", "--seed", "3",
                     "--out", str(out), "--quiet"])
    assert code in (0, 3)
    fit_result = json.loads(out.read_text())
    assert set(fit_result) <= set(api_result)
    assert set(api_result) - set(fit_result) == {"run_id"}
    for key in ("series", "spec_resolved", "changepoints", "current", "segments", "data_quality"):
        assert api_result[key] == fit_result[key], key


def test_multipart_region_in_the_spec_and_a_change_date(make_app):
    client = make_app()
    spec = dict(FAST, region="orlund", change_date=["2026-05-01:7"])
    with open(LONG, "rb") as fh:
        r = client.post("/api/v1/runs", data={"file": (fh, "regions_long.csv"), "spec": json.dumps(spec)},
                        content_type="multipart/form-data")
    assert r.status_code == 201, r.get_json()
    result = client.get(r.get_json()["url"]).get_json()["result"]
    assert result["series"]["name"] == "Orlund"
    # the loader's key is not a model option; the spec is kept as given, the date became days inside
    assert "region" not in result["spec"]
    assert result["spec"]["change_date"] == ["2026-05-01:7"]
    assert result["spec_resolved"]["changepoint_priors"] == [{"day": 60.0, "spread_days": 7.0}]
    assert result["series"]["start"] == "2026-03-02"


def test_stop_and_delete_keep_the_owner_rules(make_app):
    class Holding:
        def submit(self, run_id):
            pass  # the run stays queued

    client = make_app(user={"name": "ana", "admin": False}, executor=Holding())
    r = _post_json(client, _text(DAILY), FAST)
    assert r.status_code == 201 and r.get_json()["status"] == "queued"
    url = r.get_json()["url"]
    queued = client.get(url).get_json()
    assert queued["owner"] == "ana" and queued["progress"] is None and queued["result"] is None

    client.signed_in["user"] = {"name": "bo", "admin": False}
    for refused in (client.post(url + "/stop"), client.delete(url)):
        assert "owner" in _assert_clean_error(refused, 403)["message"]
    assert client.get(url).get_json()["status"] == "queued"

    client.signed_in["user"] = {"name": "ana", "admin": False}
    stopped = client.post(url + "/stop")
    assert stopped.status_code == 202
    assert stopped.get_json()["status"] == "stopped" and stopped.get_json()["id"] == r.get_json()["id"]
    assert client.get(url).get_json()["status"] == "stopped"
    deleted = client.delete(url)
    assert deleted.status_code == 200 and deleted.get_json() == {"id": r.get_json()["id"], "deleted": True}
    assert client.get(url).status_code == 404
    assert client.services.store.get_series(r.get_json()["id"]) is None  # its data went too


def test_an_admin_may_stop_and_delete_another_users_run(make_app):
    class Holding:
        def submit(self, run_id):
            pass

    client = make_app(user={"name": "ana", "admin": False}, executor=Holding())
    url = _post_json(client, _text(DAILY), FAST).get_json()["url"]
    client.signed_in["user"] = {"name": "chief", "admin": True}
    assert client.post(url + "/stop").status_code == 202
    assert client.delete(url).status_code == 200


def test_a_running_run_is_deleted_by_its_worker_when_it_stops(make_app):
    from bendline.app.execute import _finish

    class Holding:
        def submit(self, run_id):
            pass

    client = make_app(user={"name": "ana", "admin": False}, executor=Holding())
    rid = _post_json(client, _text(DAILY), FAST).get_json()["id"]
    store = client.services.store
    store.update_run(rid, status="running", worker="host:1")  # as a worker would have
    r = client.delete(f"/api/v1/runs/{rid}")
    assert r.status_code == 202 and r.get_json()["status"] == "deleting"
    assert store.stop_requested(rid)
    assert _finish(store, rid, "host:1", {"status": "stopped"}) is False  # the worker removes it
    assert store.get_run(rid) is None and client.get(f"/api/v1/runs/{rid}").status_code == 404


# --------------------------------------------------------------------------
# Refusals


def test_a_bad_csv_is_refused_naming_the_row_column_and_value(make_app, tmp_path):
    client = make_app()
    r = _post_json(client, "date,cases\n2026-01-01,3\n2026-01-02,abc\n2026-01-03,4\n", FAST)
    error = _assert_clean_error(r, 400, tmp_path)
    assert error["row"] == 3 and error["column"] == "cases" and error["value"] == "abc"
    assert "row 3" in error["message"]
    assert client.services.runs.list() == []


def test_multipart_bad_csv_names_the_uploaded_file(make_app):
    client = make_app()
    data = {"file": (io.BytesIO(b"date,cases\n2026-01-01,3\n2026-01-02,x\n"), "/home/ana/my counts.csv"),
            "spec": "{}"}
    error = _assert_clean_error(client.post("/api/v1/runs", data=data, content_type="multipart/form-data"),
                                400)
    assert error["source"] == "my counts.csv" and error["row"] == 3
    assert "/home/ana" not in error["message"]


def test_an_unknown_option_is_refused_by_name(make_app):
    client = make_app()
    error = _assert_clean_error(_post_json(client, _text(DAILY), dict(FAST, segmentz=3)), 400)
    assert error["column"] == "segmentz" and "segmentz" in error["message"]
    assert error["source"] == "spec"
    assert client.services.runs.list() == []


@pytest.mark.parametrize("spec, words", [
    ({"segments": 40}, ("segments", "40", "1 to 12")),
    ({"segments": "three"}, ("segments", "three")),
    ({"segments": 12, "min_segment_days": 30}, ("segments", "too few")),
])
def test_bad_segments_are_refused_with_the_numbers(make_app, spec, words):
    client = make_app()
    error = _assert_clean_error(_post_json(client, _text(DAILY), dict(FAST, **spec)), 400)
    assert error["column"] == "segments"
    for word in words:
        assert word in error["message"]
    assert client.services.runs.list() == []


def test_an_oversize_file_gets_413_json_or_multipart(make_app):
    client = make_app()
    big = "date,cases\n" + "2026-01-01,1\n" * (reader.MAX_BYTES // 13 + 10)
    assert len(big.encode()) > reader.MAX_BYTES
    error = _assert_clean_error(_post_json(client, big, FAST), 413)
    assert "20 MB" in error["message"]
    data = {"file": (io.BytesIO(big.encode()), "big.csv"), "spec": json.dumps(FAST)}
    error = _assert_clean_error(client.post("/api/v1/runs", data=data, content_type="multipart/form-data"),
                                413)
    assert "20 MB" in error["message"]
    assert client.services.runs.list() == []


@pytest.mark.parametrize("body, words", [
    ("{not json", ("not valid JSON", "line 1")),
    ("[1, 2]", ("JSON object",)),
    ('{"spec": {}}', ("csv",)),
    ('{"csv": 12, "spec": {}}', ("csv", "string")),
    ('{"csv": "date,n\\n", "spec": [1]}', ("spec", "object")),
    ('{"csv": "date,n\\n", "spec": {}, "colour": "red"}', ("colour",)),
])
def test_a_malformed_json_body_is_refused(make_app, body, words):
    client = make_app()
    error = _assert_clean_error(client.post("/api/v1/runs", data=body, content_type="application/json"), 400)
    for word in words:
        assert word in error["message"]


def test_malformed_multipart_and_other_content_types_are_refused(make_app):
    client = make_app()
    no_file = client.post("/api/v1/runs", data={"spec": "{}"}, content_type="multipart/form-data")
    assert "'file'" in _assert_clean_error(no_file, 400)["message"]
    with open(DAILY, "rb") as fh:
        bad_spec = client.post("/api/v1/runs", data={"file": (fh, "d.csv"), "spec": "{segments: 2"},
                               content_type="multipart/form-data")
    assert _assert_clean_error(bad_spec, 400)["column"] == "spec"
    plain = client.post("/api/v1/runs", data="date,cases\n", content_type="text/csv")
    assert "multipart" in _assert_clean_error(plain, 415)["message"]


def test_loader_keys_given_twice_and_bad_change_dates_are_refused(make_app):
    client = make_app()
    text = _text(LONG)
    twice = _post_json(client, text, dict(FAST, region="Orlund"), region="Tamsey")
    assert _assert_clean_error(twice, 400)["column"] == "region"
    no_region = _post_json(client, text, FAST)
    assert "regions" in _assert_clean_error(no_region, 400)["message"]
    outside = _post_json(client, text, dict(FAST, change_date=[{"date": "2030-01-01"}]), region="Orlund")
    error = _assert_clean_error(outside, 400)
    assert error["column"] == "change_date" and "outside the series" in error["message"]
    badly_written = _post_json(client, text, dict(FAST, change_date=["01/05/2026"]), region="Orlund")
    assert "YYYY-MM-DD" in _assert_clean_error(badly_written, 400)["message"]
    assert client.services.runs.list() == []


def test_malformed_and_unknown_ids_get_404_without_a_store_lookup(make_app, monkeypatch):
    client = make_app()
    store = client.services.store
    asked = []
    real_get = store.get_run
    monkeypatch.setattr(store, "get_run", lambda run_id: asked.append(run_id) or real_get(run_id))
    for bad in ("zzz", "0123456789ABCDEF", "0123456789abcdef0", "..%2F..%2Fetc", "' or 1=1"):
        for method in (client.get, client.delete):
            error = _assert_clean_error(method(f"/api/v1/runs/{bad}"), 404)
            assert error == {"message": "no such run"}
    assert asked == []
    for method in (client.get, client.delete):
        assert _assert_clean_error(method("/api/v1/runs/0123456789abcdef"), 404) == {"message": "no such run"}
    assert asked and set(asked) == {"0123456789abcdef"}


def test_an_unreachable_queue_gives_503_without_its_details(make_app):
    class Unreachable:
        def submit(self, run_id):
            raise ConnectionError("redis://:hunter2@queue.internal:6379 refused")

    client = make_app(executor=Unreachable())
    r = _post_json(client, _text(DAILY), FAST)
    error = _assert_clean_error(r, 503)
    assert "queue" in error["message"]
    assert "hunter2" not in r.get_data(as_text=True)


def test_unknown_endpoints_wrong_methods_and_internal_errors_answer_json(make_app, monkeypatch, tmp_path):
    client = make_app()
    assert _assert_clean_error(client.get("/api/v1/nothing"), 404)["message"].startswith("no such endpoint")
    wrong = client.put("/api/v1/runs")
    _assert_clean_error(wrong, 405)
    assert wrong.headers["Allow"] == "GET, POST"
    _assert_clean_error(client.post("/api/v1/runs/0123456789abcdef"), 405)
    assert _assert_clean_error(client.get("/api/v1/runs?limit=0"), 400)["column"] == "limit"

    def broken(limit=200):
        raise RuntimeError(f"cannot open {tmp_path}/secret.db")

    monkeypatch.setattr(client.services.runs, "list", broken)
    error = _assert_clean_error(client.get("/api/v1/runs"), 500, tmp_path)
    assert "internal error" in error["message"] and "secret" not in error["message"]
    # the dashboard's own pages are left alone
    assert client.get("/").status_code == 200
