"""Callback requests refused at the edge (400, no traceback in the log): too deep, or values of the wrong type.

Over real HTTP against the dashboard behind the guard (``app.server.make_server``, 127.0.0.1, a
free port). The server log is captured (pytest's caplog on the root logger; the server runs in a
thread of this process): a refusal must leave a warning line at most, never a traceback, which is
kept for faults in the program. The depth scan is checked against an independent reference: the
depth of the value ``json.loads`` returns, walked recursively (Python standard library).
"""

from __future__ import annotations

import json
import logging
import random

import pytest
from test_sessions import GONE, Client, texts

from app import edge

# -- the depth scan, against json.loads ---------------------------------------------------------


def depth_of(value) -> int:
    """Reference: arrays and objects nested in a parsed JSON value."""
    if isinstance(value, list):
        return 1 + max((depth_of(v) for v in value), default=0)
    if isinstance(value, dict):
        return 1 + max((depth_of(v) for v in value.values()), default=0)
    return 0


def random_json(rng: random.Random, depth: int):
    if depth == 0:
        return rng.choice([1, -2.5, "a[b", 'q"{', "\\]", "}}}", None, True, "[[[[[[[[[[[["])
    kids = [random_json(rng, rng.randrange(depth)) for _ in range(rng.randrange(3))]
    kids.append(random_json(rng, depth - 1))
    rng.shuffle(kids)
    return kids if rng.random() < 0.5 else {f"k{i}[": v for i, v in enumerate(kids)}


def test_depth_scan_agrees_with_the_parsed_depth():
    rng = random.Random(20261202)
    for limit in (1, 2, 5, 20):
        for _ in range(150):
            value = random_json(rng, rng.randrange(0, 30))
            text = json.dumps(value).encode()
            assert edge.json_too_deep(text, limit) == (depth_of(json.loads(text)) > limit), text[:120]


def test_depth_scan_edges():
    assert edge.json_too_deep(b"[" * 10_000 + b"]" * 10_000)
    assert not edge.json_too_deep(b"[" * 100 + b"]" * 100)  # exactly the limit passes
    assert edge.json_too_deep(b"[" * 101 + b"]" * 101)
    inside_a_string = json.dumps({"contents": "[" * 50_000 + '\\"{' * 1000}).encode()
    assert not edge.json_too_deep(inside_a_string)  # brackets in strings do not count
    wide = ("[" + ",".join(["[1,{}]"] * 100_000) + "]").encode()
    assert not edge.json_too_deep(wide)  # many brackets, shallow
    assert edge.json_too_deep(b"[" * 101)  # unclosed still counts while it opens


# -- the schema ------------------------------------------------------------------------------------


def entry(cid, prop, value):
    return {"inputs": [{"id": cid, "property": prop, "value": value}], "state": []}


@pytest.mark.parametrize(
    ("cid", "prop", "value"),
    [
        ("degree", "value", float("inf")),
        ("degree", "value", "3"),
        ("degree", "value", 2.5),
        ("degree", "value", True),
        ("degree", "drag_value", float("nan")),
        ("seed", "value", "7"),
        ("folds", "value", [5]),
        ("holdout", "value", float("-inf")),
        ("holdout", "value", "25"),
        ("x-column", "value", 3),
        ("bands", "value", "confidence"),
        ("bands", "value", [1]),
        ("upload", "contents", {"a": 1}),
        ("dataset", "data", [1, 2]),
        ("dataset", "data", "abc"),
        ("dataset", "data", {"id": {"$ne": None}}),
        ("dataset", "data", {"name": "no id"}),
        ("dataset", "data", {"id": "x", "columns": "x,y"}),
        ("split-key", "data", {"dataset": "d", "x": "x", "y": "y", "mode": "kfold", "holdout": 0.25, "folds": 5}),
        (
            "split-key",
            "data",
            {"dataset": "d", "x": "x", "y": "y", "mode": "kfold", "holdout": 0.25, "folds": "5", "seed": 0},
        ),
        ("degree-settled", "data", {"d": 3}),
        ("report-button", "n_clicks", "1"),
    ],
)
def test_schema_refuses_wrong_types(cid, prop, value):
    problem = edge.check_callback_body(entry(cid, prop, value))
    assert problem and problem.startswith(f"{cid}.{prop} "), problem


@pytest.mark.parametrize(
    ("cid", "prop", "value"),
    [
        ("degree", "value", 99),  # out of range, well typed: the callback says so
        ("degree", "value", None),
        ("degree", "value", 3.0),
        ("folds", "value", 1),
        ("seed", "value", 1e21),
        ("seed", "value", None),
        ("holdout", "value", 7.5),
        ("dataset", "data", None),
        ("dataset", "data", {}),
        ("dataset", "data", {"id": "abc", "extra": [1, {"x": 2}]}),  # keys added later pass
        ("bands", "value", []),
        ("new-panel-widget", "value", {"anything": [1, "two"]}),  # ids the schema does not know pass
        ("degree", "newprop", "x"),
    ],
)
def test_schema_passes_well_typed_and_unknown_values(cid, prop, value):
    assert edge.check_callback_body(entry(cid, prop, value)) is None


def test_schema_opens_wildcard_groups_and_ignores_pattern_ids():
    body = {"inputs": [[{"id": "degree", "property": "value", "value": "x"}]], "state": []}
    assert edge.check_callback_body(body).startswith("degree.value")
    body = {"inputs": [{"id": {"type": "degree", "index": 1}, "property": "value", "value": "x"}]}
    assert edge.check_callback_body(body) is None
    for junk in ([], "x", {"inputs": "x", "state": 5}, {"inputs": [5, None, {"id": 1}]}):
        assert edge.check_callback_body(junk) is None  # left to Dash, which answers 400


def test_schema_passes_every_value_the_page_starts_with():
    """The schema must not refuse what the real page sends: every initial prop of every component passes."""
    from app import create_app

    app = create_app(None)
    layout = json.loads(app.server.test_client().get("/_dash-layout").data)
    seen = []

    def walk(node):
        if isinstance(node, list):
            for v in node:
                walk(v)
        elif isinstance(node, dict):
            props = node.get("props", {})
            for prop, value in props.items() if isinstance(props.get("id"), str) else ():
                kind = edge.SCHEMA.get((props["id"], prop))
                if kind is not None:
                    seen.append((props["id"], prop))
                    assert kind.problem(value) is None, (props["id"], prop, value)
            for v in props.values():
                walk(v)

    walk(layout)
    assert ("dataset", "data") in seen and ("degree", "value") in seen and ("folds", "value") in seen


def test_unseen_dataset_ids_are_replaced():
    body = {
        "inputs": [{"id": "dataset", "property": "data", "value": {"id": "mine"}}],
        "state": [{"id": "split-key", "property": "data", "value": {"dataset": "theirs", "x": "x"}}],
    }
    assert edge.hide_unseen_datasets(body, lambda i: i == "mine") == 1
    assert body["inputs"][0]["value"]["id"] == "mine"
    assert body["state"][0]["value"]["dataset"] == edge.GONE_ID


# -- over HTTP -----------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def server():
    from app import create_app
    from app.server import make_server

    srv = make_server(create_app(None), host="127.0.0.1", port=0, threads=4).start()
    yield srv
    srv.stop()


def tracebacks(caplog) -> list[str]:
    return [r.getMessage() for r in caplog.records if r.exc_info] + (
        ["Traceback"] if "Traceback" in caplog.text else []
    )


def post_raw(client: Client, body: bytes):
    return client.request("POST", "/_dash-update-component", body)


def test_ten_thousand_deep_array_is_400_without_a_traceback(server, caplog):
    caplog.set_level(logging.WARNING)
    c = Client(server.port)
    for body in (b"[" * 10_000 + b"]" * 10_000, b'{"a":' * 10_000 + b"1" + b"}" * 10_000, b"[" * 100_000):
        status, data = post_raw(c, body)
        assert status == 400, (status, data[:200])
        assert b"nested deeper" in data
    status, data = post_raw(c, b"[]")  # matches no callback: 400 as before
    assert status == 400
    assert tracebacks(caplog) == []
    assert c.get_json("/_dash-layout")  # still serving


def sample_key(c: Client) -> tuple[dict, dict]:
    """The shared sample's dataset record and a split key for it (from a real split callback)."""
    layout = json.dumps(c.get_json("/_dash-layout"))
    data = json.loads(layout)

    def find(node):
        if isinstance(node, dict):
            if node.get("props", {}).get("id") == "dataset":
                return node["props"]["data"]
            return next((d for v in node.values() if (d := find(v))), None)
        if isinstance(node, list):
            return next((d for v in node if (d := find(v))), None)
        return None

    ds = find(data)
    status, r = c.split(ds, **{"x-column.value": ds["x"], "y-column.value": ds["y"]})
    assert status == 200 and "split-key" in r, r
    return ds, r["split-key"]["data"]


def degree_body(c: Client, key, value, drag=None) -> bytes:
    from bench_load import Protocol

    dep = c.proto.find("overfit-alert.children", "degree-settled.data")
    return Protocol.body(
        dep,
        {"degree-settled.data": value if drag is None else drag},
        {"split-key.data": key},
        ["degree-settled.data"],
    )


def test_wrong_typed_values_are_400_without_a_traceback(server, caplog):
    c = Client(server.port)
    c.request("GET", "/")
    ds, key = sample_key(c)
    caplog.set_level(logging.WARNING)
    bad = [
        degree_body(c, key, 3).replace(b'"value": 3', b'"value": Infinity'),
        degree_body(c, key, "3"),
        degree_body(c, key, 3, drag=-1e400),  # -1e400 is -inf in Python: json.dumps writes -Infinity
        degree_body(c, "a string, not a record", 3),
        degree_body(c, {**key, "folds": "ten"}, 3),
        degree_body(c, {**key, "dataset": ["not", "an", "id"]}, 3),
    ]
    assert b"Infinity" in bad[0]
    for body in bad:
        status, data = post_raw(c, body)
        assert status == 400, (body[:300], status, data[:300])
        assert b"wrong type" in data
    for over in ({"seed.value": "7"}, {"folds.value": "5"}, {"dataset.data": [ds]}, {"x-column.value": 1}):
        status, data = c.split(ds, **{"x-column.value": ds["x"], "y-column.value": ds["y"], **over})
        assert status == 400 and b"wrong type" in data, (over, status, data[:300])
    status, data = c.dataset_view({"id": 42})
    assert status == 400 and b"dataset.data" in data
    assert tracebacks(caplog) == []
    assert any("refused a callback request" in r.getMessage() for r in caplog.records)


def test_out_of_range_values_reach_the_callbacks(server, caplog):
    c = Client(server.port)
    c.request("GET", "/")
    ds, key = sample_key(c)
    caplog.set_level(logging.WARNING)
    status, data = post_raw(c, degree_body(c, key, 99))
    assert status == 200
    r = json.loads(data)["response"]
    assert "degree-readout" in r  # clamped to the highest degree the data allow
    status, r = c.split(ds, **{"x-column.value": ds["x"], "y-column.value": ds["y"], "folds.value": 1})
    assert status == 200 and "fit-chart" in r  # the charts keep the folds in force
    split_box = {"split-mode.value": "kfold", "group-column.value": None, "holdout.value": 25, "seed.value": 0}
    status, r = c.callback("holdout-box.style", "split-mode.value", {**split_box, "folds.value": 1})
    assert status == 200
    assert "folds" in texts(r["split-note"]["children"]).lower()  # the split panel's own message
    status, r = c.dataset_view({"id": "no-such-dataset"})
    assert status == 200 and GONE in texts(r["intake-report"]["children"])
    assert tracebacks(caplog) == []


def test_without_the_screen_a_wrong_record_leaves_a_traceback(caplog):
    """The log capture can fail: a wrongly typed record straight to Dash (no screen) logs a traceback."""
    from bench_load import Protocol

    from app import create_app

    app = create_app(None)
    client = app.server.test_client()
    deps = Protocol(client.get("/_dash-dependencies").get_json())
    dep = deps.find("overfit-alert.children", "degree-settled.data")
    body = Protocol.body(dep, {"degree-settled.data": 3}, {"split-key.data": [1, 2]}, [])
    caplog.set_level(logging.WARNING)
    client.post("/_dash-update-component", data=body, content_type="application/json")
    assert tracebacks(caplog) != []


def test_degreescope_serve_answers_400_and_logs_no_traceback():
    """The command users run, in its own process: its stderr (the server log) holds no traceback."""
    import os
    import select
    import subprocess
    import sys
    import time
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent
    env = dict(os.environ, PYTHONPATH=str(root), PYTHONUNBUFFERED="1")
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "serve", "--port", "0", "--threads", "2"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        cwd=root,
        env=env,
    )
    try:
        end, line = time.monotonic() + 60, b""
        while time.monotonic() < end and not line:
            if select.select([proc.stdout], [], [], 0.5)[0]:
                line = proc.stdout.readline()
            elif proc.poll() is not None:
                break
        assert line.startswith(b"degreescope dashboard: http://127.0.0.1:"), line
        port = int(line.rsplit(b":", 1)[1].strip(b"/\n"))
        c = Client(port)
        c.request("GET", "/")
        status, data = post_raw(c, b"[" * 10_000 + b"]" * 10_000)
        assert status == 400, data[:200]
        ds, key = sample_key(c)
        status, data = post_raw(c, degree_body(c, key, 3).replace(b'"value": 3', b'"value": Infinity'))
        assert status == 400 and b"wrong type" in data
        status, data = c.split(ds, **{"x-column.value": ds["x"], "y-column.value": ds["y"], "seed.value": "7"})
        assert status == 400 and b"wrong type" in data
        assert c.get_json("/_dash-layout")
    finally:
        proc.terminate()
        _, err = proc.communicate(timeout=20)
    assert b"Traceback" not in err, err.decode(errors="replace")[-2000:]
    assert b"refused a callback request" in err  # the refusals are logged, as one line each
