"""The server guard: Host check, access token, no file served from a browser-supplied path.

Every server here binds to 127.0.0.1 on a free port, runs in a thread and is
stopped at the end of its test. The expectations are the guard's own promises
(see app/server.py) plus common practice, no source: DNS-rebinding defence by
Host allow-list, and path traversal attempts (``..``, ``%2e%2e``, ``%2f``) on
static routes.
"""

from __future__ import annotations

import http.client
import importlib.util
from pathlib import Path

import pytest

from app.server import allowed_host_headers, build_wsgi, is_loopback, make_server


def _tiny_wsgi(environ, start_response):
    body = b"hello from the inner app"
    start_response("200 OK", [("Content-Type", "text/plain"), ("Content-Length", str(len(body)))])
    return [body]


def _request(port, path="/", *, host=None, headers=None, method="GET", body=None):
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
    hdrs = {"Host": host if host is not None else f"127.0.0.1:{port}"}
    hdrs.update(headers or {})
    conn.putrequest(method, path, skip_host=True, skip_accept_encoding=True)
    for k, v in hdrs.items():
        conn.putheader(k, v)
    if body is not None:
        conn.putheader("Content-Length", str(len(body)))
    conn.endheaders(body)
    resp = conn.getresponse()
    data = resp.read()
    conn.close()
    return resp.status, dict(resp.getheaders()), data


@pytest.fixture
def running():
    started = []

    def start(app, **kw):
        kw.setdefault("host", "127.0.0.1")
        srv = make_server(app, port=0, threads=4, **kw).start()
        started.append(srv)
        return srv

    yield start
    for srv in started:
        srv.stop()


# -- Host header (DNS rebinding) ------------------------------------------------


def test_loopback_bind_accepts_loopback_names_with_port(running):
    srv = running(_tiny_wsgi)
    for name in ("127.0.0.1", "localhost", "[::1]", "LOCALHOST"):
        status, headers, body = _request(srv.port, host=f"{name}:{srv.port}")
        assert status == 200, name
        assert body == b"hello from the inner app"
        assert headers["X-Content-Type-Options"] == "nosniff"
        assert headers["X-Frame-Options"] == "DENY"


@pytest.mark.parametrize(
    "host",
    ["evil.example:{port}", "attacker.test", "127.0.0.1", "127.0.0.1:1", "localhost.evil.example:{port}", ""],
)
def test_foreign_host_header_is_refused(running, host):
    srv = running(_tiny_wsgi)
    status, _, body = _request(srv.port, host=host.format(port=srv.port))
    assert status == 421
    assert b"host name" in body
    assert srv.guard.refused["host"] >= 1


def test_allowed_host_sets():
    assert allowed_host_headers("127.0.0.1", 8050) >= {"127.0.0.1:8050", "localhost:8050", "[::1]:8050"}
    assert "127.0.0.1" not in allowed_host_headers("127.0.0.1", 8050)
    assert "127.0.0.1" in allowed_host_headers("127.0.0.1", 80)  # default port may be left out
    named = allowed_host_headers("192.0.2.7", 9000)
    assert named == {"192.0.2.7:9000"}
    assert "[::1]:9000" in allowed_host_headers("::1", 9000)
    assert "lab-box:9000" in allowed_host_headers("192.0.2.7", 9000, ["lab-box"])
    assert is_loopback("127.0.0.1") and is_loopback("::1") and is_loopback("localhost") and is_loopback("127.1.2.3")
    assert not is_loopback("0.0.0.0") and not is_loopback("192.0.2.7")


# -- access token ---------------------------------------------------------------


def test_token_flow_sets_cookie_and_refuses_without(running):
    # bound to loopback for the test, but with a token as a non-loopback bind would have
    srv = running(_tiny_wsgi, token="s3cret-token-value")
    assert srv.url.endswith("/?token=s3cret-token-value")

    status, _, _ = _request(srv.port, "/")
    assert status == 403
    status, _, _ = _request(srv.port, "/?token=wrong")
    assert status == 403
    status, _, _ = _request(srv.port, "/", headers={"Cookie": f"degreescope_token_{srv.port}=wrong"})
    assert status == 403

    status, headers, _ = _request(srv.port, "/some/page?a=1&token=s3cret-token-value")
    assert status == 303
    assert headers["Location"] == "/some/page?a=1"  # the token leaves the address bar
    cookie = headers["Set-Cookie"]
    assert cookie.startswith(f"degreescope_token_{srv.port}=s3cret-token-value")
    assert "HttpOnly" in cookie and "SameSite=Strict" in cookie

    status, _, body = _request(
        srv.port, "/", headers={"Cookie": f"other=1; degreescope_token_{srv.port}=s3cret-token-value"}
    )
    assert status == 200 and body == b"hello from the inner app"
    # a malformed cookie header is a refusal, not a crash
    status, _, _ = _request(srv.port, "/", headers={"Cookie": 'a="unterminated; ;;==; b'})
    assert status == 403
    assert srv.guard.refused["token"] >= 4


def test_auto_token_only_for_non_loopback():
    lo = build_wsgi(_tiny_wsgi, host="127.0.0.1", port=1234, token=None)
    assert lo.token is None
    srv = make_server(_tiny_wsgi, host="127.0.0.1", port=0, threads=1)  # token="auto" on loopback
    try:
        assert srv.token is None and "token" not in srv.url
    finally:
        srv.stop()


def test_request_body_limit(running):
    srv = running(_tiny_wsgi, max_request_body_size=1000)
    status, _, _ = _request(srv.port, "/", method="POST", body=b"x" * 5000)
    assert status == 413
    status, _, _ = _request(srv.port, "/", method="POST", body=b"x" * 500)
    assert status == 200


# -- no file from a browser-supplied path ------------------------------------------

TRAVERSALS = [
    "/assets/../../etc/passwd",
    "/assets/..%2f..%2fetc%2fpasswd",
    "/assets/%2e%2e/%2e%2e/etc/passwd",
    "/assets/%2e%2e%2f%2e%2e%2fetc%2fpasswd",
    "/assets/..%5c..%5cetc%5cpasswd",
    "/assets//etc/passwd",
    "/assets/%2fetc%2fpasswd",
    "/assets/....//....//etc/passwd",
    "/_dash-component-suites/dash/../../../../etc/passwd",
    "/_dash-component-suites/dash/..%2f..%2f..%2f..%2fetc%2fpasswd",
    "/_dash-component-suites/os/path.py",
    "/_dash-component-suites/dash/dash.py",
    "/_dash-component-suites/dash/%2e%2e/__init__.py",
]


def _dash_app(tmp_path: Path):
    import dash
    from dash import html

    assets = tmp_path / "assets"
    assets.mkdir()
    (assets / "style.css").write_text("body { color: #123; }\n")
    (tmp_path / "secret.txt").write_text("NOT-FOR-THE-BROWSER\n")
    app = dash.Dash(__name__, assets_folder=str(assets))
    app.layout = html.Div("tiny")
    return app


def _serving_app(tmp_path: Path):
    """The real dashboard when it exists, else a tiny Dash app with an assets folder."""
    if importlib.util.find_spec("app") and hasattr(__import__("app"), "create_app"):
        from app import create_app

        return create_app(None), None
    return _dash_app(tmp_path), tmp_path / "secret.txt"


def test_no_path_traversal_through_dash_routes(running, tmp_path):
    dash_app, _ = _serving_app(tmp_path)
    srv = running(dash_app)
    status, _, _ = _request(srv.port, "/_dash-layout")
    assert status == 200
    for path in TRAVERSALS:
        status, _, body = _request(srv.port, path)
        assert status >= 400 or b"root:" not in body, path
        assert b"root:x:" not in body and b"NOT-FOR-THE-BROWSER" not in body, path
        assert b"import " not in body, path  # no Python source either
        assert status < 500, path


def test_traversal_out_of_a_tiny_assets_folder(running, tmp_path):
    dash_app = _dash_app(tmp_path)
    srv = running(dash_app)
    status, _, body = _request(srv.port, "/assets/style.css")
    assert status == 200 and b"color" in body  # the folder itself is served
    for path in [
        "/assets/../secret.txt",
        "/assets/..%2fsecret.txt",
        "/assets/%2e%2e/secret.txt",
        "/assets/%2e%2e%2fsecret.txt",
    ]:
        status, _, body = _request(srv.port, path)
        assert status == 404, (path, status)
        assert b"NOT-FOR-THE-BROWSER" not in body


def test_dash_itself_refuses_traversal_without_the_guard(tmp_path):
    """Defence in depth: Flask's static route and Dash's script route refuse on their own too."""
    dash_app = _dash_app(tmp_path)
    build_wsgi(dash_app, host="127.0.0.1", port=1)  # registers the 404 answer for unknown scripts
    client = dash_app.server.test_client()
    for path in [
        "/assets/../secret.txt",
        "/assets/..%2fsecret.txt",
        "/assets/%2e%2e%2fsecret.txt",
        "/_dash-component-suites/dash/dash.py",
        "/_dash-component-suites/dash/../../../../etc/passwd",
    ]:
        resp = client.get(path)
        assert resp.status_code == 404, (path, resp.status_code)
        assert b"NOT-FOR-THE-BROWSER" not in resp.data and b"root:x:" not in resp.data


# -- start-up policy (no non-loopback socket is opened by these tests) ----------------------


def test_token_policy_and_startup_warnings():
    from app.server import resolve_token, startup_warnings

    assert resolve_token("127.0.0.1", "auto") is None
    assert resolve_token("localhost", "auto") is None
    t1, t2 = resolve_token("0.0.0.0", "auto"), resolve_token("192.0.2.7", "auto")
    assert t1 and t2 and t1 != t2 and len(t1) >= 32  # secrets.token_urlsafe(24): 32 characters
    assert resolve_token("0.0.0.0", None) is None  # --no-token
    assert startup_warnings("127.0.0.1", token="auto", debug=False) == []
    warn = startup_warnings("0.0.0.0", token="auto", debug=False)
    assert len(warn) == 1 and "no login" in warn[0] and "anyone who can reach this port" in warn[0]
    warn = startup_warnings("192.0.2.7", token=None, debug=True)
    assert len(warn) == 3 and any("--no-token" in w for w in warn) and any("debug" in w for w in warn)


def test_url_shows_the_token_for_the_bound_address():
    srv = make_server(_tiny_wsgi, host="127.0.0.1", port=0, threads=1, token="abc")
    try:
        assert srv.url == f"http://127.0.0.1:{srv.port}/?token=abc"
    finally:
        srv.stop()


def test_real_dashboard_behind_the_guard(running):
    from app import create_app

    srv = running(create_app(None))
    status, headers, body = _request(srv.port, "/")
    assert status == 200 and b"<html" in body.lower()
    assert headers["X-Frame-Options"] == "DENY"
    status, _, body = _request(srv.port, "/_dash-layout")
    assert status == 200 and b"sensor_calibration.csv" in body
    status, _, _ = _request(srv.port, "/_dash-layout", host="rebound.example:%d" % srv.port)
    assert status == 421
    # an upload is parsed as data: a pickle or a script is refused with a message, never run
    import base64
    import json
    import pickle

    class Boom:
        def __reduce__(self):
            return (exec, ("open('/tmp/degreescope-pwned', 'w').write('x')",))

    for payload, name in ((pickle.dumps(Boom()), "data.pkl"), (b"#!/bin/sh\nid > /tmp/degreescope-pwned\n", "run.sh")):
        body = json.dumps(
            {
                "output": "..dataset.data...upload-notice.children..",
                "outputs": [{"id": "dataset", "property": "data"}, {"id": "upload-notice", "property": "children"}],
                "inputs": [
                    {
                        "id": "upload",
                        "property": "contents",
                        "value": "data:application/octet-stream;base64," + base64.b64encode(payload).decode(),
                    }
                ],
                "state": [{"id": "upload", "property": "filename", "value": name}],
                "changedPropIds": ["upload.contents"],
            }
        ).encode()
        status, _, resp = _request(
            srv.port, "/_dash-update-component", method="POST", body=body, headers={"Content-Type": "application/json"}
        )
        assert status == 200, resp[:300]
        answer = json.loads(resp)["response"]
        assert "dataset" not in answer or answer["dataset"].get("data") in (None, {})  # nothing was loaded
        assert "upload-notice" in answer
        assert not Path("/tmp/degreescope-pwned").exists()


def test_malformed_callback_requests_are_400_and_the_server_keeps_serving(running):
    import json

    from app import create_app

    srv = running(create_app(None))
    upload = {
        "output": "..dataset.data...upload-notice.children..",
        "outputs": [{"id": "dataset", "property": "data"}, {"id": "upload-notice", "property": "children"}],
        "changedPropIds": ["upload.contents"],
    }
    bodies = [
        b"[]",  # not an object
        json.dumps({"output": "no-such.thing", "inputs": []}).encode(),  # no such callback
        json.dumps({**upload, "inputs": [], "state": []}).encode(),  # inputs missing
        json.dumps({**upload, "inputs": "x", "state": 5}).encode(),  # wrong types
    ]
    for body in bodies:
        status, _, resp = _request(
            srv.port, "/_dash-update-component", method="POST", body=body, headers={"Content-Type": "application/json"}
        )
        assert status == 400, (body, status, resp[:200])
        assert b"Traceback" not in resp
    status, _, resp = _request(
        srv.port,
        "/_dash-update-component",
        method="POST",
        body=b"{not json",
        headers={"Content-Type": "application/json"},
    )
    assert status == 400
    status, _, body = _request(srv.port, "/_dash-layout")
    assert status == 200 and b"sensor_calibration.csv" in body


def test_session_cookie_beside_the_token_and_not_on_refusals(running):
    srv = running(_tiny_wsgi, token="s3cret-token-value")
    session_name = f"degreescope_session_{srv.port}"
    for host, headers in ((f"127.0.0.1:{srv.port}", {}), ("evil.example", {})):
        status, hdrs, _ = _request(srv.port, "/", host=host, headers=headers)
        assert status in (403, 421)
        assert session_name not in hdrs.get("Set-Cookie", "")
    status, hdrs, body = _request(srv.port, "/", headers={"Cookie": f"degreescope_token_{srv.port}=s3cret-token-value"})
    assert status == 200 and body == b"hello from the inner app"
    assert hdrs["Set-Cookie"].startswith(session_name + "=")
    assert "HttpOnly" in hdrs["Set-Cookie"] and "SameSite=Strict" in hdrs["Set-Cookie"]
    sid = hdrs["Set-Cookie"].split(";")[0].split("=", 1)[1]
    status, hdrs, _ = _request(
        srv.port, "/", headers={"Cookie": f"degreescope_token_{srv.port}=s3cret-token-value; {session_name}={sid}"}
    )
    assert status == 200 and "Set-Cookie" not in hdrs  # kept, not replaced
