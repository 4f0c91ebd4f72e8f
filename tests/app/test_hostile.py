"""The hostile-request corpus (tests/app/hostile.py) against the local and the team server.

Every case must answer cleanly (expected status, nothing leaked); every run
already saved must still be there and readable afterwards; every spec stored
by an accepted case must be one the option table accepts as it is.
"""

from __future__ import annotations

import json

import pytest

from bendline.inference.options import check_public

from . import hostile


class RecordingExecutor:
    """Takes submissions without fitting: the corpus is about the HTTP layer, not the engine."""

    def __init__(self):
        self.submitted = []

    def submit(self, run_id):
        self.submitted.append(run_id)

    def stop(self, run_id):
        return None


def _run_corpus(client, store, headers=None, secrets=()):
    # one legitimate run saved first: the corpus must leave it as it was
    kept = client.post("/api/v1/runs", headers=headers, **hostile._run())
    assert kept.status_code in (201, 202), kept.get_data(as_text=True)
    kept_id = kept.get_json()["id"]
    kept_record = store.get_run(kept_id)
    before = {r["id"] for r in store.list_runs()}
    failures = {}
    for case in hostile.CASES:
        problems = hostile.check(client, case, headers=headers, secrets=secrets)
        if problems:
            failures[case[0]] = problems
    after = store.list_runs()
    accepted = [c for c in hostile.CASES if c[4] & {201, 202}]
    new = [r for r in after if r["id"] not in before]
    assert store.get_run(kept_id) == kept_record
    return failures, accepted, new, before


def _assert_clean(failures, accepted, new, before, store):
    assert not failures, json.dumps(failures, indent=1)
    assert len(new) == len(accepted)  # only the legitimate ones were stored
    for run in new:
        spec = store.get_run(run["id"])["spec"]
        assert check_public(spec) == spec  # stored already checked: nothing to coerce or refuse
    assert before <= {r["id"] for r in store.list_runs()}  # nothing saved was lost


def test_the_local_server_answers_every_hostile_case_cleanly(tmp_path):
    from bendline.app.commands.serve import build_local_app

    app, executor = build_local_app(str(tmp_path / "runs"), workers=1, warm=False)
    recorder = RecordingExecutor()
    services = app.server.config["BENDLINE"]
    services.runs.executor = recorder
    client = app.server.test_client()
    failures, accepted, new, before = _run_corpus(client, services.store, headers={"X-Bendline-Request": "1"},
                                                  secrets=(str(tmp_path),))
    _assert_clean(failures, accepted, new, before, services.store)
    assert len(recorder.submitted) == len(accepted) + 1  # and the kept run
    # a foreign Host is refused outright (DNS rebinding), reads included
    assert client.get("/api/v1/runs", base_url="http://evil.example:8050").status_code == 400
    assert client.get("/api/v1/runs", base_url="http://127.0.0.1:8050").status_code == 200
    executor.shutdown()
