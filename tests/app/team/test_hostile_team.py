"""The hostile-request corpus (tests/app/hostile.py) against the team server, signed in and not."""

from __future__ import annotations

from .. import hostile
from ..test_hostile import _assert_clean, _run_corpus


def test_the_team_server_answers_every_hostile_case_cleanly(redis_url, team_users):
    from bendline.app.store.redis_store import RedisRunStore
    from bendline.app.team.wsgi import build_team_app

    from .conftest import USER

    app = build_team_app(redis_url, cookie_secure=True, maintain=False)
    app.server.config["TESTING"] = True
    client = app.server.test_client()
    store = RedisRunStore(redis_url)
    token = team_users.new_token(USER)
    failures, accepted, new, before = _run_corpus(client, store, headers={"Authorization": f"Bearer {token}"},
                                                  secrets=(redis_url, token))
    _assert_clean(failures, accepted, new, before, store)
    # and without credentials nothing of the corpus gets further than the guard
    for case in hostile.CASES:
        name, method, path, kwargs, _expect, _option = case
        response = client.open(path, method=method, **{k: v for k, v in kwargs.items() if k != "headers"})
        assert response.status_code in {204, 302, 400, 401, 403, 404, 405, 413}, (name, response.status_code)
        assert not hostile.leaks(response.get_data(as_text=True), redis_url), name
    assert {r["id"] for r in store.list_runs()} == {r["id"] for r in new} | before
