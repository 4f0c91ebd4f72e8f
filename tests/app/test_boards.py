"""Boards: every series of a long-format file fitted, ranked, and compared release to release.

The lifecycle runs through the API on a real store with fits done inline
(small settings: a few seconds on any machine); the change rules are checked
on hand-made results whose answer is known.
"""

from __future__ import annotations

import base64
import csv
import io
import json

import pytest

from bendline.app.boards import board_csv, board_view, ranked

from .test_api import LONG, _assert_clean_error, make_app  # noqa: F401 - make_app is a fixture

SPEC = {"by": "district", "segments": 2, "chains": 4, "draws": 100, "seed": 3}
OPTIONS = {k: v for k, v in SPEC.items() if k != "by"}


def _file(text, name="regions.csv"):
    return {"file": (io.BytesIO(text.encode()), name)}


def _post(client, path, text, spec, name="regions.csv"):
    return client.post(path, data={**_file(text, name), "spec": json.dumps(spec)},
                       content_type="multipart/form-data")


def _without_last_week(text):
    lines = text.splitlines()
    last = sorted({line.split(",")[0] for line in lines[1:]})[-7:]
    return "\n".join([lines[0]] + [line for line in lines[1:] if line.split(",")[0] not in last]) + "\n"


@pytest.fixture
def regions_text():
    with open(LONG, encoding="utf-8") as fh:
        return fh.read()


def test_a_board_fits_every_series_and_a_new_release_says_what_changed(make_app, regions_text):
    client = make_app()
    first = _post(client, "/api/v1/boards", _without_last_week(regions_text), SPEC)
    assert first.status_code == 201, first.get_data(as_text=True)
    board = first.get_json()
    assert board["by"] == "district" and len(board["releases"]) == 1
    rows = board["releases"][0]["series"]
    assert sorted(r["name"] for r in rows) == ["Harrowmere", "Orlund", "Quillby", "Tamsey"]
    assert all(r["status"] in ("converged", "unconverged") and r["run_id"] for r in rows)
    # Orlund was drawn falling at 2% a day after 2026-05-01 (regions_long.json): the board says so
    orlund = next(r for r in rows if r["name"] == "Orlund")
    assert orlund["current"]["direction"] == "falling"
    assert -3.0 < orlund["current"]["growth_pct_per_day"]["median"] < -1.0
    assert orlund["latest_change_date"]["q05"] <= "2026-05-01" <= orlund["latest_change_date"]["q95"]
    assert all(r["changes_since_previous"] is None for r in rows)

    second = _post(client, f"/api/v1/boards/{board['id']}/releases", regions_text, {})
    assert second.status_code == 201, second.get_data(as_text=True)
    board = client.get(f"/api/v1/boards/{board['id']}").get_json()
    assert [r["index"] for r in board["releases"]] == [0, 1]
    assert board["releases"][0]["data_hash"] != board["releases"][1]["data_hash"]
    before = {r["name"]: r for r in board["releases"][0]["series"]}
    for row in board["releases"][1]["series"]:
        change = row["changes_since_previous"]
        assert change["direction_before"] == before[row["name"]]["current"]["direction"]
        assert change["growth_pct_per_day_before"] == before[row["name"]]["current"]["growth_pct_per_day"]["median"]
        assert change["trend_revision_pct"] is not None and abs(change["trend_revision_pct"]) < 50
        assert row["run_id"] != before[row["name"]]["run_id"]  # fitted again; the old run stays readable
        assert client.get(f"/api/v1/runs/{before[row['name']]['run_id']}").status_code == 200
    # the board is not a run: the run list holds its fits, not the board itself
    listed = {r["id"] for r in client.get("/api/v1/runs").get_json()["runs"]}
    assert board["id"] not in listed and orlund["run_id"] in listed
    assert [b["id"] for b in client.get("/api/v1/boards").get_json()["boards"]] == [board["id"]]


def test_a_series_too_short_for_the_segments_is_marked_and_the_others_proceed(make_app, regions_text):
    client = make_app()
    lines = regions_text.splitlines()
    short = [line for line in lines[1:] if ",Tamsey," in line][:5]
    text = "\n".join([lines[0]] + [line for line in lines[1:] if ",Tamsey," not in line] + short) + "\n"
    answer = _post(client, "/api/v1/boards", text, SPEC)
    assert answer.status_code == 201, answer.get_data(as_text=True)
    rows = {r["name"]: r for r in answer.get_json()["releases"][0]["series"]}
    assert rows["Tamsey"]["run_id"] is None and rows["Tamsey"]["status"] == "refused"
    assert "too few" in rows["Tamsey"]["reason"]
    assert all(rows[n]["run_id"] for n in ("Harrowmere", "Orlund", "Quillby"))


@pytest.mark.parametrize("spec, column", [
    ({"by": "county"}, "by"),            # not a column of the file
    ({"by": 5}, "by"),
    ({"by": "district", "segments": "many"}, "segments"),
    ({"by": "district", "rm": 1}, "rm"),
])
def test_a_board_request_with_a_bad_choice_is_refused_naming_it(make_app, regions_text, spec, column, tmp_path):
    client = make_app()
    answer = _post(client, "/api/v1/boards", regions_text, spec)
    error = _assert_clean_error(answer, 400, tmp_path)
    assert column in json.dumps(error)
    assert client.get("/api/v1/boards").get_json()["boards"] == []  # nothing stored


def test_only_the_owner_or_an_admin_adds_a_release(make_app, regions_text):
    client = make_app(user={"name": "ana", "admin": False})
    board = _post(client, "/api/v1/boards", _without_last_week(regions_text), dict(SPEC, segments=1)).get_json()
    client.signed_in["user"] = {"name": "bo", "admin": False}
    refused = _post(client, f"/api/v1/boards/{board['id']}/releases", regions_text, {})
    assert refused.status_code == 403
    assert client.get(f"/api/v1/boards/{board['id']}").status_code == 200  # the team can read it
    assert client.get("/api/v1/boards/0123456789abcdef").status_code == 404


# --- the change rules, on hand-made results ------------------------------------------------------

def _result(direction, median_pct, cps, band_last):
    return {
        "series": {"interval_days": 1},
        "diagnostics": {"reportable": True, "warnings": []},
        "current": {"direction": direction, "growth_pct_per_day": {"median": median_pct, "q05": median_pct - 1,
                                                                   "q95": median_pct + 1},
                    "prob_growing": 0.99 if direction == "growing" else 0.01},
        "changepoints": [{"median_date": m, "q05_date": a, "q95_date": b} for m, a, b in cps],
        "band": {"dates": [d for d, _ in band_last], "trend_q50": [v for _, v in band_last]},
    }


class _Runs:
    """Stored runs and results, as RunService.get and .result answer them."""

    def __init__(self, results):
        self.results = results

    def get(self, run_id):
        return {"id": run_id, "status": "converged"} if run_id in self.results else None

    def result(self, run_id):
        return self.results.get(run_id)


def _board(*releases):
    return {"id": "0123456789abcdef", "releases": [
        {"index": i, "created": "", "file_name": "f.csv", "data_hash": str(i),
         "series": [{"name": n, "run_id": rid, "reason": None} for n, rid in rel]}
        for i, rel in enumerate(releases)]}


def test_a_turn_a_new_change_date_and_a_revision_are_found_and_ranked_first():
    runs = _Runs({
        "a0": _result("falling", -2.0, [("2026-03-01", "2026-02-25", "2026-03-05")], [("2026-04-01", 100.0)]),
        "a1": _result("growing", 3.0, [("2026-03-02", "2026-02-26", "2026-03-06"),
                                      ("2026-04-03", "2026-04-01", "2026-04-06")], [("2026-04-01", 110.0)]),
        "b0": _result("falling", -1.0, [("2026-03-10", "2026-03-05", "2026-03-15")], [("2026-04-01", 50.0)]),
        "b1": _result("falling", -1.5, [("2026-03-11", "2026-03-06", "2026-03-16")], [("2026-04-01", 45.0)]),
        "c1": _result("growing", 1.0, [], []),
    })
    view = board_view(_board([("A", "a0"), ("B", "b0")], [("A", "a1"), ("B", "b1"), ("C", "c1")]), runs)
    rows = {r["series"]: r for r in view["releases"][1]["rows"]}
    a, b, c = rows["A"], rows["B"], rows["C"]
    assert (a["direction_before"], a["direction"], a["attention"]) == ("falling", "growing", "turned")
    assert a["new_change_date"] == "2026-04-03"  # outside the earlier change date's 90% interval
    assert a["revision_pct"] == 10.0  # 100 -> 110 on the earlier release's last date
    assert b["new_change_date"] is None and b["attention"] == "" and b["revision_pct"] == -10.0
    assert c["direction_before"] is None and c["attention"] == "growing"  # new this release
    good, rest = ranked(view["releases"][1]["rows"])
    assert [r["series"] for r in good] == ["A", "C", "B"] and rest == []


def test_unreportable_series_are_set_apart_and_the_csv_is_neutralised():
    bad = _result("growing", 9.0, [], [])
    bad["diagnostics"]["reportable"] = False
    runs = _Runs({"x": bad, "y": _result("falling", -1.0, [], [])})
    view = board_view(_board([("=HYPERLINK(\"http://e\")", "x"), ("Y", "y"), ("Z", None)]), runs)
    good, rest = ranked(view["releases"][0]["rows"])
    assert [r["series"] for r in good] == ["Y"]  # the faster-growing but unreportable one is not ranked
    assert {r["series"] for r in rest} == {"=HYPERLINK(\"http://e\")", "Z"}
    table = list(csv.DictReader(io.StringIO(board_csv(view))))
    assert [r["series"] for r in table][0] == "Y"
    assert all(not r["series"].startswith("=") for r in table)  # OWASP CSV injection: neutralised


def test_a_series_opened_from_the_board_and_refitted_becomes_its_current_run(tmp_path, regions_text):
    """Open a board's series in the dashboard, change K, Fit: the board shows the new run and keeps the old one."""
    from bendline.app.boards import BoardService
    from bendline.app.executors import InlineExecutor
    from bendline.app.runs import RunService
    from bendline.app.store.disk import DiskRunStore
    from bendline.app.web import create_app, ids
    from bendline.app.web.callbacks import loading, running
    from bendline.app.web.context import AppServices
    from bendline.app.web.controls import NAMES, controls_from_public

    from .test_callbacks import trigger

    store = DiskRunStore(str(tmp_path / "store"))
    runs = RunService(store, InlineExecutor(store))
    app = create_app(AppServices(runs=runs, store=store))
    with app.server.test_request_context("/"):
        boards = BoardService(runs)
        board = boards.create(regions_text.encode(), "regions.csv", "district", dict(OPTIONS, segments=1))
        first = {r["name"]: r["run_id"] for r in board["releases"][0]["series"]}
        trigger(f"{ids.REQUEST_RUN}.data", {"run": first["Orlund"]})
        out = loading.load(None, None, None, {"run": first["Orlund"]}, None, None, None)
        key, shown = out[0], out[2]
        assert shown == first["Orlund"]
        values = controls_from_public(dict(OPTIONS, segments=2))
        _, new_id, err = running.fit(1, key, [], *[values[n] for n in NAMES], shown)
        assert not err and new_id != shown
        view = board_view(boards.get(board["id"]), runs)
        rows = {r["series"]: r for r in view["releases"][-1]["rows"]}
        assert rows["Orlund"]["run_id"] == new_id and rows["Harrowmere"]["run_id"] == first["Harrowmere"]
        history = boards.get(board["id"])["releases"][-1]["series"]
        assert next(r for r in history if r["name"] == "Orlund")["history"] == [first["Orlund"], new_id]
        # a fit of another series opened from the same page is not the board's
        other_csv = "date,count\n" + "".join(f"2026-01-{d:02d},{d}\n" for d in range(1, 29))
        trigger(f"{ids.UPLOAD}.contents")
        other = loading.load("data:text/csv;base64," + base64.b64encode(other_csv.encode()).decode(),
                             None, None, None, "other.csv", key, new_id)
        _, other_id, err = running.fit(1, other[0], [], *[values[n] for n in NAMES], new_id)
        assert runs.get(other_id)["parent"] is None
        assert board_view(boards.get(board["id"]), runs)["releases"][-1]["rows"][1]["run_id"] != other_id


def test_the_board_pages_report_csv_and_briefing_view(make_app, regions_text):
    client = make_app()
    board = _post(client, "/api/v1/boards", regions_text, dict(SPEC, segments=1)).get_json()
    bid = board["id"]
    assert client.get(f"/board/{bid}").status_code == 200
    assert client.get("/board/").status_code == 200
    for bad in ("/board/0123456789abcdef", "/board/nothing", "/board/x/y", f"/board/{bid}x/table.csv",
                "/brief/board/0123456789abcdef"):
        assert client.get(bad).status_code == 404, bad
    table = client.get(f"/board/{bid}/table.csv")
    assert table.status_code == 200 and "attachment" in table.headers["Content-Disposition"]
    rows = list(csv.DictReader(io.StringIO(table.get_data(as_text=True).lstrip("\ufeff"))))
    assert sorted(r["series"] for r in rows) == ["Harrowmere", "Orlund", "Quillby", "Tamsey"]
    report = client.get(f"/board/{bid}/report.html").get_data(as_text=True)
    # self-contained: no script, nothing fetched from elsewhere; every chart has words
    assert "<script" not in report and "http://" not in report.replace('xmlns="http://www.w3.org/2000/svg"', "")
    assert "https://" not in report and report.count("<svg") == 4 and report.count('aria-label="Orlund:') == 1
    assert "no substitute for epidemiological judgement" in report
    brief = client.get(f"/brief/board/{bid}").get_data(as_text=True)
    assert "Needs attention" in brief and "presenting" in brief and "http-equiv=\"refresh\"" not in brief


def test_failed_series_are_fitted_again_from_the_board_with_their_own_data(make_app, regions_text):
    client = make_app()
    board = _post(client, "/api/v1/boards", regions_text, dict(SPEC, segments=1)).get_json()
    bid = board["id"]
    rows = {r["name"]: r for r in board["releases"][0]["series"]}
    store = client.services.store
    store.update_run(rows["Quillby"]["run_id"], status="failed", reason="the worker sent no heartbeat for 30 s")
    answer = client.post(f"/api/v1/boards/{bid}/refit", json={"spec": {"draws": 150}})
    assert answer.status_code == 202, answer.get_data(as_text=True)
    body = answer.get_json()
    assert list(body["refit"]) == ["Quillby"]  # only the failed one
    new = body["refit"]["Quillby"]
    now = {r["name"]: r for r in body["releases"][-1]["series"]}
    assert now["Quillby"]["run_id"] == new and now["Quillby"]["status"] in ("converged", "unconverged")
    assert now["Orlund"]["run_id"] == rows["Orlund"]["run_id"]  # nothing else touched
    assert client.services.runs.series(new).content_hash() == client.services.runs.series(
        rows["Quillby"]["run_id"]).content_hash()  # the same data
    assert store.get_run(new)["spec"]["draws"] == 150  # the override, for this run only
    # refusals name the problem
    assert client.post(f"/api/v1/boards/{bid}/refit", json={"series": ["Nowhere"]}).status_code == 400
    assert client.post(f"/api/v1/boards/{bid}/refit", json={"spec": {"by": "x"}}).status_code == 400
    assert client.post(f"/api/v1/boards/{bid}/refit", json=[1]).status_code == 400
    assert client.post("/api/v1/boards/0123456789abcdef/refit", json={}).status_code == 404
