"""Every Dash callback of the dashboard and the briefing view fed crafted values.

A browser only ever sends what the page's components hold, but anyone can
post to ``/_dash-update-component``. Each callback is called with each
crafted value in every input and state slot; the answer must be a normal
update (200) or "nothing to update" (204), never a 500, a traceback or a
server path. Only callbacks that run in the browser (clientside: the server
has no function for them) may answer 400; a server callback that raises on
a crafted value fails this test even though the server turns the error into
a 400 for the client.
"""

from __future__ import annotations

import itertools

from bendline.app.commands.serve import build_local_app

CRAFTED = [None, "", "x", "<script>alert(1)</script>", 0, -1, 1e308, True, [], [None], ["x", 5], {},
           {"a": 1}, {"run": "../../etc/passwd"}, {"id": 5, "status": []}, "0123456789abcdef",
           "?run=../../x", "data:text/csv;base64,!!!", "data:text/csv;base64," + "QQ==" * 10]


def _outputs(key):
    """The ``outputs`` field Dash's front end sends for a callback_map key."""
    parts = key[2:-2].split("...") if key.startswith("..") else [key]
    outs = []
    for part in parts:
        ident, prop = part.rsplit(".", 1)
        outs.append({"id": ident, "property": prop.split("@")[0]})
    return outs if key.startswith("..") else outs[0]


def _walk(client, prefix, callback_map):
    answers = {}
    for key, cb in callback_map.items():
        slots = [dict(s) for s in cb["inputs"]], [dict(s) for s in cb.get("state", [])]
        n = len(slots[0]) + len(slots[1])
        for position, value in itertools.product(range(n), CRAFTED):
            inputs = [{**s, "value": None} for s in slots[0]]
            state = [{**s, "value": None} for s in slots[1]]
            target = (inputs + state)[position]
            target["value"] = value
            body = {"output": key, "outputs": _outputs(key), "inputs": inputs, "state": state,
                    "changedPropIds": [f"{inputs[0]['id']}.{inputs[0]['property']}"] if inputs else []}
            response = client.post(prefix + "_dash-update-component", json=body)
            answers[(key, position, repr(value)[:30])] = (response.status_code, response.get_data(as_text=True),
                                                           "callback" not in cb)
    return answers


def test_no_callback_answers_a_crafted_value_with_an_error(tmp_path, capsys):
    app, executor = build_local_app(str(tmp_path / "runs"), workers=1, warm=False)
    client = app.server.test_client()
    client.get("/")  # the layout is built on the first page load
    answers = _walk(client, "/", app.callback_map)
    answers.update(_walk(client, "/brief/", app.brief_app.callback_map))
    answers.update(_walk(client, "/board/", app.board_app.callback_map))
    executor.shutdown()
    bad = {k: v[:2] for k, v in answers.items()
           if v[0] not in ((200, 204, 400) if v[2] else (200, 204))
           or "Traceback" in v[1] or str(tmp_path) in v[1] or 'File "' in v[1]}
    assert not bad, list(bad.items())[:5]
    assert len(answers) > 500  # the walk reached every callback's slots
    refused = sum(1 for v in answers.values() if v[0] == 400)
    assert refused == sum(1 for v in answers.values() if v[2])  # clientside ones: no server function
    with capsys.disabled():
        print(f"\ncrafted callback values: {len(answers)} requests, {refused} refused (400, clientside callbacks), "
              f"{len(answers) - refused} handled as updates or no-ops")
