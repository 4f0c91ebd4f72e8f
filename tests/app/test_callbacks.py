"""Dashboard callbacks called as plain functions (no browser)."""

from __future__ import annotations

import base64
import os

import pytest
from dash import Patch, no_update
from dash._callback_context import context_value
from dash._utils import AttributeDict

from bendline.app.executors import InlineExecutor
from bendline.app.runs import RunService
from bendline.app.store.disk import DiskRunStore
from bendline.app.web import create_app, ids
from bendline.app.web.callbacks import changes, loading, panels, running

ST, PO = panels.NAMES.index("state"), panels.NAMES.index("poll_off")


def controls(**values):
    """The option controls' values in the callbacks' order, defaults for the rest."""
    from bendline.app.web.controls import NAMES, controls_from_public

    base = controls_from_public({})
    base.update(values)
    return [base[name] for name in NAMES]
from bendline.app.web.context import AppServices, get_series

from .figure_helpers import _load

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLE = os.path.join(ROOT, "sample_series", "daily_admissions.csv")


@pytest.fixture
def app(tmp_path):
    store = DiskRunStore(str(tmp_path / "store"))
    services = AppServices(runs=RunService(store, InlineExecutor(store)), store=store)
    return create_app(services)


def trigger(prop_id, value=None):
    context_value.set(AttributeDict(triggered_inputs=[{"prop_id": prop_id, "value": value}]))


def _contents(path_or_text):
    data = open(path_or_text, "rb").read() if os.path.exists(path_or_text) else path_or_text.encode()
    return "data:text/csv;base64," + base64.b64encode(data).decode()


def _load_sample(app):
    trigger(f"{ids.UPLOAD}.contents")
    out = loading.load(_contents(SAMPLE), None, None, None, "daily_admissions.csv", None, None)
    return out[0]


def test_upload_keeps_the_series_server_side(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        series, rec = get_series(app.server.config["BENDLINE"].store, key)
        assert series.n == 273 and rec["label"] == "daily_admissions.csv"
        info, notes = loading.describe(key)
        assert "273 days" in str(info) and "negative count" in str(notes)


def test_a_bad_upload_reports_and_changes_nothing(app):
    with app.server.test_request_context("/"):
        trigger(f"{ids.UPLOAD}.contents")
        out = loading.load(_contents("date,cases\n2026-01-01,1\n2026-01-02,x\n"), None, None, None, "bad.csv", "old",
                           None)
        assert out[0] is no_update  # the loaded series stays
        assert "row 3" in out[6] and "'x'" in out[6]


def test_long_format_upload_offers_regions(app):
    with app.server.test_request_context("/"):
        trigger(f"{ids.UPLOAD}.contents")
        path = os.path.join(ROOT, "sample_series", "regions_long.csv")
        out = loading.load(_contents(path), None, None, None, "regions_long.csv", None, None)
        assert [o["value"] for o in out[3]] == ["Harrowmere", "Orlund", "Quillby", "Tamsey"]
        assert out[4] == "Harrowmere" and out[5] == {}
        trigger(f"{ids.REGION}.value", "Tamsey")
        again = loading.load(None, None, "Tamsey", None, None, out[0], None)
        series, _ = get_series(app.server.config["BENDLINE"].store, again[0])
        assert series.name == "Tamsey"


def test_change_date_edits(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        trigger(f"{ids.ADD_CHANGE}.n_clicks", 1)
        cps = changes.edit(1, None, None, [], [], [], key)
        assert len(cps) == 1 and cps[0]["spread_days"] == 14.0
        # a drag of line 0 snaps to whole days; zoom keys are not edits
        trigger(f"{ids.MAIN}.relayoutData")
        moved = changes.edit(1, None, {"shapes[0].x0": "2026-03-10 17:22:01.5", "shapes[0].x1": "x"}, [], [], cps, key)
        assert moved[0]["day"] == 64.0  # 2026-01-05 + 64 days = 2026-03-10
        assert changes.edit(1, None, {"autosize": True}, [], [], moved, key) is no_update
        assert changes.edit(1, None, {"xaxis.range[0]": "2026-02-01"}, [], [], moved, key) is no_update
        # a click adds a line where it lands
        trigger(f"{ids.MAIN}.clickData")
        two = changes.edit(1, {"points": [{"x": "2026-06-20"}]}, None, [], [], moved, key)
        assert [c["day"] for c in two] == [64.0, 166.0]
        # spread and removal by index
        context_value.set(AttributeDict(triggered_inputs=[
            {"prop_id": '{"index":1,"type":"change-spread"}.value', "value": 5}]))
        spread = changes.edit(1, None, None, [14, 5], [0, 0], two, key)
        assert spread[1]["spread_days"] == 5
        assert changes.edit(1, None, None, [14, 5], [0, 0], spread, key) is no_update  # re-drawn inputs
        context_value.set(AttributeDict(triggered_inputs=[
            {"prop_id": '{"index":0,"type":"change-remove"}.n_clicks', "value": 1}]))
        left = changes.edit(1, None, None, [14, 5], [1, 0], spread, key)
        assert [c["day"] for c in left] == [166.0]
        rows, k, disabled, note = changes.render_list(left, key, 3)
        assert k == 2 and disabled and "set by the 1 change date" in note


def test_fit_validates_and_names_the_control(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        url, _, err = running.fit(1, key, [], *controls(segments=3, growth_prior_pct=20, gi_mean=5.0, chains=8, draws=100, seed=1), None)
        assert url is no_update and err.startswith("Generation interval")
        url, _, err = running.fit(1, key, [], *controls(segments=3, growth_prior_pct=20, chains=None, draws=100, seed=1), None)
        assert "Chains" in err and "empty" in err
        url, _, err = running.fit(1, None, [], *controls(segments=3, growth_prior_pct=20, chains=8, draws=100, seed=1), None)
        assert err == "Load a series first."


def test_fit_submits_and_the_panels_render_the_run(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        cps = [{"day": 70.0, "spread_days": 10.0}, {"day": 170.0, "spread_days": 10.0}]
        url, run_id, err = running.fit(1, key, cps, *controls(segments=3, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        assert err == "" and url == f"?run={run_id}"
        rec = app.server.config["BENDLINE"].runs.get(run_id)
        assert rec["options"]["segments"] == 3
        assert rec["options"]["changepoint_priors"][0] == {"day": 70.0, "spread_days": 10.0}
        out = panels.render(key, cps, "bars", "linear", None, run_id, None)
        main = out[0]
        assert [s["editable"] for s in main.layout.shapes[:2]] == [True, True]
        assert any("90% interval" in (t.name or "") and len(t.y) == 273 for t in main.data)
        assert out[PO] is True  # the run is finished: no polling


def test_poll_sets_controls_and_trace_picker_only_when_they_change(app):
    # Dash fires every callback listening to an output that is set, even to
    # the same value: a poll that re-sent "disabled" or the picker's value
    # re-ran the run list, the export links and a full render each time.
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        trigger(f"{ids.RUN_ID}.data")
        out = panels.render(key, [], "bars", "linear", None, run_id, None)
        state, param = out[ST], out[5]
        assert state["controls"] == out[PO:PO + 4] and param in state["trace_names"]
        trigger(f"{ids.POLL}.n_intervals")
        again = panels.poll(1, run_id, state, key, [], None, param)
        assert all(v is no_update for v in again[PO:PO + 4]) and again[5] is no_update
        fresh = panels.poll(1, run_id, {"run": run_id}, key, [], None, param)
        assert fresh[PO] is True and fresh[ST]["controls"] == out[PO:PO + 4]
        # the picker's value, set by a poll to what the state holds, does not redraw everything
        trigger(f"{ids.TRACE_PARAM}.value", param)
        skipped = panels.render(key, [], "bars", "linear", None, run_id, param, state=state)
        assert all(v is no_update for v in skipped)
        other = next(n for n in state["trace_names"] if n != param)
        redrawn = panels.render(key, [], "bars", "linear", None, run_id, other, state=state)
        assert redrawn[5] == other and redrawn[ST]["trace_param"] == other


def test_a_runs_first_band_is_sent_alone_and_the_other_panels_follow(app):
    # the browser draws one patched chart far sooner than seven new ones
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        svc = app.server.config["BENDLINE"]
        svc.store.update_run(run_id, status="running")  # as if still sampling
        trigger(f"{ids.POLL}.n_intervals")
        state = {"run": run_id, "iteration": 0, "phase": "init", "counts": {}, "banded": False}
        first = panels.poll(1, run_id, state, key, [], None, None)
        assert first[0] is not no_update and first[10] is not no_update
        assert all(v is no_update for v in first[1:10])
        assert first[ST]["banded"] and first[ST]["iteration"] is None
        # then one group of panels per poll: the change dates, rates and weekday panels ...
        second = panels.poll(2, run_id, first[ST], key, [], None, None)
        assert all(second[i] is not no_update for i in (0, 1, 2, 6)) and second[3] is second[8] is no_update
        assert second[ST]["iteration"] is not None
        snap = svc.store.get_snapshot(run_id)

        def newer(by):  # a later snapshot, with other segment numbers
            svc.store.put_snapshot(run_id, dict(snap, iteration=snap["iteration"] + by,
                                                segments=snap["segments"][::-1]))

        # ... then the draws' summaries (traces, residual check, diagnostics)
        newer(3)
        third = panels.poll(3, run_id, second[ST], key, [], None, None)
        assert all(third[i] is not no_update for i in (3, 7, 8)) and third[1] is third[2] is no_update
        # a newer snapshot a moment later moves the main chart only ...
        newer(7)
        fourth = panels.poll(4, run_id, third[ST], key, [], None, None)
        assert fourth[0] is not no_update and fourth[1] is fourth[2] is no_update
        # ... and once SECONDARY_SECONDS have passed, the others follow
        later = dict(fourth[ST], secondary_at=fourth[ST]["secondary_at"] - panels.SECONDARY_SECONDS)
        newer(9)
        fifth = panels.poll(5, run_id, later, key, [], None, None)
        assert fifth[1] is not no_update and fifth[2] is not no_update
        # a finished run gets everything at once: its last poll stops the timer
        svc.store.update_run(run_id, status="converged")
        last = panels.poll(1, run_id, state, key, [], None, None)
        assert last[PO] is True and last[1] is not no_update and last[2] is not no_update


def test_a_new_run_on_blank_panels_patches_the_main_chart_only(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        trigger(f"{ids.SERIES_KEY}.data")
        blank = panels.render(key, [], "bars", "linear", None, None, None)
        assert blank[ST]["run"] is None and blank[ST]["series"] == key
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        svc = app.server.config["BENDLINE"]
        svc.store.update_run(run_id, status="running")
        svc.store.put_snapshot(run_id, _load("snapshot_00_init"))  # no band yet
        trigger(f"{ids.RUN_ID}.data", run_id)
        out = panels.render(key, [], "bars", "linear", None, run_id, None, state=blank[ST])
        assert isinstance(out[0], Patch) and all(v is no_update for v in out[1:10])
        assert out[ST]["run"] == run_id and out[PO] is False  # polling starts
        # with a band already there, or over another run's panels, everything is drawn
        svc.store.put_snapshot(run_id, _load("snapshot_04_sampling"))
        full = panels.render(key, [], "bars", "linear", None, run_id, None, state=blank[ST])
        assert not isinstance(full[0], Patch) and full[2] is not no_update
        svc.store.put_snapshot(run_id, _load("snapshot_00_init"))
        over = panels.render(key, [], "bars", "linear", None, run_id, None, state=full[ST])
        assert not isinstance(over[0], Patch)


def test_an_empty_panel_is_redrawn_when_its_empty_state_changes(app):
    # a fit without a weekday effect: the panel goes from "appear once the
    # first draws arrive" to "not fitted" although the numbers (none) did not change
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        trigger(f"{ids.SERIES_KEY}.data")
        blank = panels.render(key, [], "bars", "linear", None, None, None)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, weekday="off", growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        trigger(f"{ids.POLL}.n_intervals")
        out = panels.poll(1, run_id, dict(blank[ST], run=run_id, iteration=-1), key, [], None, None)
        assert out[6] is not no_update
        assert "not fitted" in out[6].layout.annotations[0].text


def test_a_check_on_every_snapshot_does_not_starve_the_other_panels():
    # past the criterion but short of the requested draws, the engine checks
    # every few draws: each snapshot then has new diagnostics
    import time

    now = time.time()
    old, new = {"diag": 100, "phase": "sampling"}, {"diag": 150, "phase": "sampling"}
    both_old = {"secondary_at": now - 2.0, "diag_drawn_at": now - 1.5}
    assert panels._groups_due(both_old, old, new, finished=False) == (True, False)
    assert panels._groups_due(dict(both_old, secondary_at=now), old, new, finished=False) == (False, True)
    assert panels._groups_due({"secondary_at": now, "diag_drawn_at": now}, old, new, finished=False) == (False, False)
    assert panels._groups_due({"secondary_at": now, "diag_drawn_at": now}, old, new, finished=True) == (True, True)


def test_the_last_poll_redraws_panels_a_throttled_poll_left_provisional(app):
    # the worker writes the final snapshot just before the status: a poll can
    # see "done" while the run still reads "running", skip the throttled
    # panels, and the next poll (status finished) must still draw them
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        final = app.server.config["BENDLINE"].store.get_snapshot(run_id)
        streaming = dict(final, phase="sampling")
        seen = {"run": run_id, "iteration": final["iteration"], "phase": "done", "counts": {},
                "marks": panels._marks(streaming), "banded": True}
        trigger(f"{ids.POLL}.n_intervals")
        out = panels.poll(9, run_id, seen, key, [], None, None)
        assert out[PO] is True  # the last poll
        assert out[1] is not no_update and out[2] is not no_update and out[6] is not no_update


def test_to_patch_sets_only_what_changed():
    p = panels.to_patch({"traces": {3: {"y": [1, 2]}}, "annotations": {0: {"text": "x"}}, "title": "t"})
    ops = p.to_plotly_json()["operations"]
    locations = [tuple(o["location"]) for o in ops]
    assert ("data", 3, "y") in locations and ("layout", "annotations", 0) in locations
    assert ("layout", "title", "text") in locations


@pytest.mark.slow
def test_how_many_segments_compares_and_adopts(app):
    from bendline.app.web.callbacks import segments

    with app.server.test_request_context("/"):
        key = _load_sample(app)
        cps = [{"day": 70.0, "spread_days": 10.0}]
        cid, poll_off, status = segments.start(1, key, cps, *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2))
        assert poll_off is False and "Fitting 6 segment counts" in status
        words, chart, label, style, off = segments.follow(1, cid)  # inline executor: all done already
        assert off is True and style == {}
        assert "The data support" in str(words)
        k = int(label.split()[1])
        assert 2 <= k <= 6
        got_k, got_cps, said = segments.adopt(1, cid, cps, key)
        assert got_k == k and got_cps == (cps if k == 2 else [])
        assert f"Segments set to {k}" in said
        # day 70 of a series starting 2026-01-05 is 2026-03-16: named when removed, said to stay when kept
        assert ("Removed your 1 tentative change date (2026-03-16 ± 10 days)" in said if k != 2
                else "change date is kept" in said)
        averaged = segments.strip(True, cid)
        assert len(averaged["probability"]) == 273 and averaged["series_hash"]
        # the member fits do not crowd the run list (no plain fits were made here)
        assert "No runs yet" in str(running.run_rows(0, 0, None))


def test_a_moved_spread_shading_is_redrawn_from_the_list(app):
    # shapes[0] is the line of the one change date, shapes[1] its spread shading,
    # shapes[2] the highlight: moving either of the last two changes no date but
    # sends the list back, so the chart is redrawn with the shading in step
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        cps = [{"day": 64.0, "spread_days": 10.0}]
        trigger(f"{ids.MAIN}.relayoutData")
        for shape in (1, 2):
            out = changes.edit(1, None, {f"shapes[{shape}].x0": "2026-04-01", f"shapes[{shape}].x1": "2026-04-09"},
                               [], [], cps, key)
            assert out == cps and out is not cps
        assert changes.edit(1, None, {"autosize": True}, [], [], cps, key) is no_update


def test_a_new_upload_keeps_the_analysts_choices(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        cps = [{"day": 64.0, "spread_days": 10.0}, {"day": 166.0, "spread_days": 7.0}]
        trigger(f"{ids.UPLOAD}.contents")
        out = loading.load(_contents(SAMPLE), None, None, None, "daily_admissions.csv", key, None, cps)
        assert len(out) == loading.N_OUTPUTS
        # the option controls (weekday effect included) are left as the analyst set them
        assert all(v is no_update for v in out[8:8 + len(loading.CONTROL_IDS)])
        assert out[1] == cps and out[-1] == ""
        # a series that ends earlier keeps the change dates inside it, on the same calendar dates,
        # and names the one it removed (day 166 = 2026-06-20)
        rows = "date,cases\n" + "\n".join(f"2026-02-{d:02d},{10 + d}" for d in range(1, 29)) + "\n" + \
            "\n".join(f"2026-03-{d:02d},{40 - d}" for d in range(1, 31)) + "\n"
        short = loading.load(_contents(rows), None, None, None, "short.csv", key, None, cps)
        series, _ = get_series(app.server.config["BENDLINE"].store, short[0])
        assert str(series.start) == "2026-02-01"
        assert short[1] == [{"day": 37.0, "spread_days": 10.0}]  # 2026-03-10, counted from 1 February
        assert "2026-06-20 ± 7 days" in short[-1] and "outside the new series" in short[-1]
        assert all(v is no_update for v in short[8:8 + len(loading.CONTROL_IDS)])


def test_adopting_the_advice_says_what_it_removes(app, monkeypatch):
    from bendline.app.runs import SegmentComparison
    from bendline.app.web.callbacks import segments

    advice = [{"segments": 2, "recommended": False}, {"segments": 3, "recommended": True}]
    monkeypatch.setattr(SegmentComparison, "state", lambda self, cid: ({"id": cid}, advice))
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        one = [{"day": 64.0, "spread_days": 10.0}]
        two = one + [{"day": 166.0, "spread_days": 7.0}]
        k, cps, said = segments.adopt(1, "c1", two, key)
        assert (k, cps) == (3, two) and "2 tentative change dates are kept" in said
        k, cps, said = segments.adopt(1, "c1", one, key)
        assert (k, cps) == (3, []) and "Removed your 1 tentative change date (2026-03-10 ± 10 days)" in said
        assert "3 segments need 2 change dates" in said
        assert segments.adopt(1, "c1", [], key)[:2] == (3, [])


def test_a_fit_is_marked_out_of_date_when_its_controls_change(app):
    from bendline.app.web.callbacks import stale
    from bendline.inference.options import BY_NAME, label_for

    with app.server.test_request_context("/"):
        key = _load_sample(app)
        cps = [{"day": 64.0, "spread_days": 10.0}]
        chosen = dict(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2)
        _, run_id, _ = running.fit(1, key, cps, *controls(**chosen), None)
        assert stale.stale_note(run_id, key, cps, *controls(**chosen)) == ""
        note = stale.stale_note(run_id, key, cps, *controls(**dict(chosen, weekday="off", draws=200)))
        assert note.startswith(stale.STALE_LEAD)
        for name in ("weekday", "draws"):
            assert label_for(BY_NAME[name]) in note
        assert label_for(BY_NAME["chains"]) not in note
        moved = stale.stale_note(run_id, key, [{"day": 80.0, "spread_days": 10.0}], *controls(**chosen))
        assert label_for(BY_NAME["change_date"]) in moved
        blank = stale.stale_note(run_id, key, cps, *controls(**dict(chosen, chains=None)))
        assert "Chains" in blank and "empty" in blank
        # no run, or a run of another series: nothing to mark
        assert stale.stale_note(None, key, cps, *controls(**chosen)) == ""
        assert stale.stale_note(run_id, None, cps, *controls(**chosen)) == ""


def test_run_list_entries_are_informative_and_unique(app):
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        made = [running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2),
                            None)[1] for _ in range(2)]
        store = app.server.config["BENDLINE"].store
        for run_id in made:  # made in the same second: otherwise they would read alike
            store.update_run(run_id, created_at="2026-12-02T14:43:05+00:00")
        items = running.run_rows(0, 0, None)
        texts = ["".join(str(c.children) for c in item.children) for item in items]
        assert len(texts) == 2 and len(set(texts)) == 2, texts
        for text in texts:
            assert "daily_admissions.csv" in text and "2 segments" in text
            assert "2026-12-02 14:43:05 UTC" in text and ("converged" in text or "not converged" in text)


def test_the_convergence_table_says_what_r_hat_and_ess_mean(app):
    from bendline.inference.snapshots import ESS_MIN, RHAT_MAX

    with app.server.test_request_context("/"):
        key = _load_sample(app)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2),
                                   None)
        out = panels.render(key, [], "bars", "linear", None, run_id, None)
        note = out[panels.NAMES.index("diag_note")]
        assert "R-hat compares the chains" in note and "ESS is the number of independent draws" in note
        assert f"below {RHAT_MAX:g}" in note and f"at least {ESS_MIN:,.0f}" in note


def test_the_run_shown_is_deleted_after_its_confirmation(app):
    """Delete asks first; then the run and its data are gone and the page shows no run."""
    with app.server.test_request_context("/"):
        key = _load_sample(app)
        _, run_id, _ = running.fit(1, key, [], *controls(segments=2, growth_prior_pct=20, chains=4, draws=100, seed=2), None)
        runs = app.server.config["BENDLINE"].runs
        assert running.ask_delete(1, None) == (False, "No run is shown: open one from the list first.")
        assert running.ask_delete(1, run_id) == (True, "")
        assert running.delete(None, run_id) == (no_update, no_update, no_update)  # dialog cancelled
        assert runs.get(run_id) is not None
        assert running.delete(1, run_id) == ("", None, "The run was deleted.")
        assert runs.get(run_id) is None and runs.result(run_id) is None
        assert running.delete(1, run_id)[2] == "That run no longer exists."
