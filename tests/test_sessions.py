"""Datasets belong to the browser session that uploaded them: a dataset id is not a bearer token.

Over real HTTP against the dashboard behind the guard (``app.server.make_server``, 127.0.0.1,
a free port), each client with its own cookie jar, as two browsers would be. The data are
invented (benchmarks/bench_load.py's per-session tables). The expectation is the promise in
app/session.py and app/store.py: another session's dataset is answered exactly as an
evicted one ("please upload the file again"), while the session that uploaded it keeps
working. Cookie attributes: common practice, no source (HttpOnly keeps scripts from
reading the id, SameSite=Strict keeps other sites' requests from carrying it).
"""

from __future__ import annotations

import base64
import http.client
import importlib.util
import json
import logging
import sys
from http.cookies import SimpleCookie
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parent.parent
_spec = importlib.util.spec_from_file_location("bench_load", ROOT / "benchmarks" / "bench_load.py")
bench = sys.modules.get("bench_load") or importlib.util.module_from_spec(_spec)
if "bench_load" not in sys.modules:
    sys.modules["bench_load"] = bench
    _spec.loader.exec_module(bench)

GONE = "please upload the file again"


class Client:
    """One browser: a cookie jar and the Dash callback protocol, over plain HTTP."""

    def __init__(self, port: int, *, keep_cookies: bool = True):
        self.port = port
        self.keep_cookies = keep_cookies
        self.cookies: dict[str, str] = {}
        self.set_cookies: list[str] = []
        self._proto = None

    @property
    def proto(self):
        if self._proto is None:
            self._proto = bench.Protocol(self.get_json("/_dash-dependencies"))
        return self._proto

    def request(self, method: str, path: str, body: bytes | None = None, headers: dict | None = None):
        conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=60)
        hdrs = {"Host": f"127.0.0.1:{self.port}"}
        if body is not None:
            hdrs["Content-Type"] = "application/json"
        if self.cookies:
            hdrs["Cookie"] = "; ".join(f"{k}={v}" for k, v in self.cookies.items())
        hdrs.update(headers or {})
        try:
            conn.request(method, path, body=body, headers=hdrs)
            resp = conn.getresponse()
            data = resp.read()
            for raw in resp.headers.get_all("Set-Cookie") or []:
                self.set_cookies.append(raw)
                if self.keep_cookies:
                    jar = SimpleCookie()
                    jar.load(raw)
                    self.cookies.update({k: m.value for k, m in jar.items()})
            return resp.status, data
        finally:
            conn.close()

    def get_json(self, path: str):
        status, data = self.request("GET", path)
        assert status == 200, (path, status)
        return json.loads(data)

    def callback(self, first_output: str, first_input: str, inputs: dict, state: dict | None = None):
        dep = self.proto.find(first_output, first_input)
        changed = [first_input]
        status, data = self.request(
            "POST", "/_dash-update-component", bench.Protocol.body(dep, inputs, state or {}, changed)
        )
        return status, (json.loads(data)["response"] if status == 200 and data else data)

    def upload(self, k: int) -> dict:
        contents = "data:text/csv;base64," + base64.b64encode(bench.session_csv(k)).decode()
        status, r = self.callback(
            "dataset.data", "upload.contents", {"upload.contents": contents}, {"upload.filename": f"invented-{k}.csv"}
        )
        assert status == 200, r
        assert r["dataset"]["data"]["name"] == f"invented-{k}.csv"
        return r["dataset"]["data"]

    def split(self, dataset: dict, **over):
        inputs = {**self.split_inputs(dataset), **over}
        return self.callback("fit-points.figure", "dataset.data", inputs, self.split_state())

    @staticmethod
    def split_state() -> dict:
        return {"degree.value": 1, "bands.value": []}

    @staticmethod
    def split_inputs(dataset: dict) -> dict:
        return {
            "dataset.data": dataset,
            "x-column.value": "x",
            "y-column.value": "y",
            "weights-column.value": None,
            "group-column.value": None,
            "split-mode.value": "kfold",
            "holdout.value": 25,
            "folds.value": 5,
            "seed.value": 0,
        }

    def dataset_view(self, dataset: dict):
        return self.callback("intake-report.children", "dataset.data", {"dataset.data": dataset}, {"url.search": ""})

    def model(self, key: dict, degree: int):
        dep = self.proto.find("stats.children", "split-key.data")
        names = [i["id"] + "." + i["property"] for i in dep["inputs"][1:]]
        return self.callback("stats.children", "split-key.data", {"split-key.data": key, **{n: degree for n in names}})


def texts(node) -> str:
    return " ".join(bench._texts(node))


def shows_points(figure, y_own) -> bool:
    """One trace of the chart holds exactly these y values (k-fold: every row is a training point)."""
    want = np.sort(y_own)
    for tr in figure.get("data", []):
        ys = bench.decode_array(tr.get("y"))
        if ys is not None and ys.size == want.size and np.allclose(np.sort(ys.astype(float)), want, rtol=1e-12):
            return True
    return False


@pytest.fixture(scope="module")
def server():
    from app import create_app
    from app.server import make_server

    srv = make_server(create_app(None), host="127.0.0.1", port=0, threads=4).start()
    yield srv
    srv.stop()


def no_tracebacks(caplog) -> None:
    assert not [r for r in caplog.records if r.exc_info], [r.getMessage() for r in caplog.records if r.exc_info]
    assert "Traceback" not in caplog.text


# -- the cookie ---------------------------------------------------------------------------------


def test_first_page_load_sets_a_random_httponly_strict_session_cookie(server):
    a, b = Client(server.port), Client(server.port)
    status, _ = a.request("GET", "/")
    assert status == 200
    name = f"degreescope_session_{server.port}"
    cookie = next(c for c in a.set_cookies if c.startswith(name + "="))
    assert "HttpOnly" in cookie and "SameSite=Strict" in cookie and "Path=/" in cookie
    b.request("GET", "/")
    assert len(a.cookies[name]) >= 43 and a.cookies[name] != b.cookies[name]  # secrets.token_urlsafe(32)
    before = len(a.set_cookies)
    a.request("GET", "/")
    a.request("GET", "/_dash-layout")
    assert len(a.set_cookies) == before  # a browser that has one keeps it
    # a malformed cookie is replaced, not trusted
    bad = Client(server.port)
    bad.cookies[name] = "short"
    bad.request("GET", "/")
    assert bad.cookies[name] != "short" and len(bad.cookies[name]) >= 43


def test_a_navigation_from_another_site_does_not_replace_the_session(server):
    c = Client(server.port, keep_cookies=False)
    status, _ = c.request("GET", "/", headers={"Sec-Fetch-Site": "cross-site", "Sec-Fetch-Mode": "navigate"})
    assert status == 200
    assert not [s for s in c.set_cookies if "degreescope_session" in s]
    c.request("GET", "/_dash-layout", headers={"Sec-Fetch-Site": "same-origin"})
    assert [s for s in c.set_cookies if "degreescope_session" in s]


# -- the owner check ------------------------------------------------------------------------


def test_another_session_cannot_read_a_dataset_by_its_id(server, caplog):
    caplog.set_level(logging.WARNING)
    a, b = Client(server.port), Client(server.port)
    a.request("GET", "/")
    b.request("GET", "/")
    ds_a = a.upload(7)
    x7, y7 = bench.session_data(7)

    # the owner sees its data (and fills the server's caches with views of it)
    status, r = a.split(ds_a)
    assert status == 200
    assert not texts(r.get("fit-notice", {}).get("children")), r["fit-notice"]
    assert shows_points(r["fit-points"]["figure"], y7)
    key_a = r["split-key"]["data"]
    status, r = a.model(key_a, 2)
    assert status == 200 and "coefficients" in r
    assert bench.coefficients_match(bench.coefficient_values(r["coefficients"]["children"]), x7, y7, 2)
    status, r = a.dataset_view(ds_a)
    assert status == 200 and "invented-7.csv" in texts(r["intake-report"]["children"])

    # the other session, with the same id and the same settings: asked to load the file, shown nothing of A's
    status, r = b.dataset_view(ds_a)
    assert status == 200
    assert GONE in texts(r["intake-report"]["children"])
    assert "x-column" not in r  # no column names of A's file
    status, r = b.split(ds_a)
    assert status == 200
    assert GONE in texts(r["fit-notice"]["children"])
    assert "fit-points" not in r and "split-key" not in r
    status, r = b.model(key_a, 2)
    assert status == 200
    assert GONE in texts(r["model-note"]["children"])
    assert "coefficients" not in r and "stats" not in r
    # a client that keeps no cookie is a new session on every request: refused too
    stranger = Client(server.port, keep_cookies=False)
    status, r = stranger.split(ds_a)
    assert status == 200 and GONE in texts(r["fit-notice"]["children"])

    # A is unaffected
    status, r = a.model(key_a, 3)
    assert status == 200 and "coefficients" in r
    assert bench.coefficients_match(bench.coefficient_values(r["coefficients"]["children"]), x7, y7, 3)
    no_tracebacks(caplog)


def test_each_session_reads_its_own_upload_and_the_shared_sample(server):
    a, b = Client(server.port), Client(server.port)
    a.request("GET", "/")
    b.request("GET", "/")
    sample = a.get_json("/_dash-layout")  # the start-up dataset: shared by every session

    def find_dataset(node):
        if isinstance(node, dict):
            if node.get("props", {}).get("id") == "dataset":
                return node["props"]["data"]
            return next((d for v in node.values() if (d := find_dataset(v))), None)
        if isinstance(node, list):
            return next((d for v in node if (d := find_dataset(v))), None)
        return None

    shared = find_dataset(sample)
    assert shared and shared["name"] == "sensor_calibration.csv"
    for c in (a, b):
        status, r = c.dataset_view(shared)
        assert status == 200 and "sensor_calibration.csv" in texts(r["intake-report"]["children"])
    ds_b = b.upload(11)
    status, r = b.split(ds_b)
    assert status == 200
    assert shows_points(r["fit-points"]["figure"], bench.session_data(11)[1])
    status, r = a.split(ds_b)
    assert GONE in texts(r["fit-notice"]["children"])


# -- the same in a real browser ------------------------------------------------------------------


@pytest.mark.browser
@pytest.mark.slow
def test_a_second_browser_does_not_see_the_first_ones_upload(server, tmp_path):
    from browser_support import browser_problem, chromium, wait_for_title
    from conftest import in_ci

    problem = browser_problem()
    if problem:
        if in_ci():
            pytest.fail(f"browser tests must run in CI, but {problem}", pytrace=False)
        pytest.skip(problem)
    from playwright.sync_api import sync_playwright

    csv = tmp_path / "invented-browser-a.csv"
    csv.write_bytes(bench.session_csv(23))
    url = f"http://127.0.0.1:{server.port}/"
    with sync_playwright() as p, chromium(p) as browser:
        ctx_a, ctx_b = browser.new_context(), browser.new_context()  # two cookie jars, as two people
        try:
            a = ctx_a.new_page()
            a.set_default_timeout(20_000)
            posted: list[str] = []
            a.on("request", lambda r: posted.append(r.post_data or "") if "_dash-update-component" in r.url else None)
            a.goto(url)
            wait_for_title(a, "fit-chart", "Degree")
            a.set_input_files("#upload input[type=file]", str(csv))
            a.wait_for_function("() => document.getElementById('upload-notice').innerText.includes('Loaded')")
            a.wait_for_function(
                "() => document.getElementById('intake-report').innerText.includes('invented-browser-a')"
            )
            a.wait_for_function("() => window.location.search.includes('x=')")
            shared_url = a.url
            ds_a = next(
                i["value"]
                for body in posted
                if "invented-browser-a.csv" in body
                for i in json.loads(body).get("inputs", [])
                if i.get("id") == "dataset" and isinstance(i.get("value"), dict)
            )
            assert ds_a["name"] == "invented-browser-a.csv"

            b = ctx_b.new_page()
            b.set_default_timeout(20_000)
            b.goto(shared_url)  # the address A would share: settings only, no dataset
            wait_for_title(b, "fit-chart", "Degree")
            b.wait_for_function("() => document.getElementById('intake-report').innerText.length > 0")
            # the address may name A's file (B is then asked to load it), but B sees none of its data
            assert "invented-browser-a" not in b.inner_text("#intake-report")
            # B is handed A's dataset id itself (as if copied from A's page): told to load the file, shown nothing
            b.evaluate("(ds) => window.dash_clientside.set_props('dataset', {data: ds})", ds_a)
            b.wait_for_function(
                "(t) => document.getElementById('intake-report').innerText.includes(t)", arg=GONE, timeout=20_000
            )
            b.wait_for_function("(t) => document.getElementById('fit-notice').innerText.includes(t)", arg=GONE)
            assert "invented-browser-a" not in b.inner_text("#intake-report")
            assert "invented-browser-a" in a.inner_text("#intake-report")  # A still has it
        finally:
            ctx_a.close()
            ctx_b.close()
