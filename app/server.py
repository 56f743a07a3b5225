"""Serve the dashboard with waitress, behind a small guard.

What the guard promises
-----------------------
* **Host check** (against DNS rebinding): a request whose ``Host`` header is
  not the bound address or name, with the port, is refused with 421. For a
  loopback bind, ``localhost``, ``127.0.0.1`` and ``[::1]`` are accepted too.
  For a wildcard bind (``0.0.0.0`` or ``::``) the machine's own host names and
  addresses are accepted; more names can be allowed with ``allowed_hosts``.
* **Access token** (the dashboard has no login): when the server is reachable
  from other machines, a random token (``secrets.token_urlsafe``) is required
  by default. It is printed once, in the start-up URL ``http://HOST:PORT/?token=...``.
  The first request that carries it gets an HttpOnly, SameSite=Strict cookie
  and a redirect to the same page without the token in the address; every
  other request needs the cookie, or gets 403. Tokens are compared with
  ``hmac.compare_digest``.
* **Response headers**: ``X-Content-Type-Options: nosniff``,
  ``X-Frame-Options: DENY``, ``Referrer-Policy: no-referrer`` and a
  ``frame-ancestors 'none'`` content security policy are added to every answer.
* **Request size**: waitress refuses request bodies above the upload limit
  (times 4/3 for base64, plus 1 MiB for the rest of the JSON).
* **Browser sessions**: a request without a valid session cookie gets a random
  one (``secrets.token_urlsafe``; HttpOnly, SameSite=Strict). A callback request is
  answered with its session bound (``app.session``), so the dataset store shows
  each browser only the datasets it uploaded, plus the shared start-up sample.
  A top-level navigation from another site (which does not carry SameSite=Strict
  cookies) is not given a new cookie, so it does not replace the browser's session.
* **Callback requests** are screened before Dash reads them (``app.edge``): too deeply
  nested bodies and values of the wrong type get 400, and dataset ids another
  session owns are treated as unknown.

No route here serves files. Dash serves its own scripts from installed
packages (checked against the packages it registered) and ``/assets/`` from
the dashboard's package folder through Flask's ``send_from_directory``, which
refuses paths that leave that folder; ``tests/test_server.py`` checks both.

``serve()`` blocks until interrupted; ``make_server()`` returns a server that a
test can run in a thread and stop.
"""

from __future__ import annotations

import hmac
import ipaddress
import secrets
import socket
import sys
import threading
from dataclasses import dataclass, field
from http.cookies import CookieError, SimpleCookie
from typing import Any, Callable, Iterable
from urllib.parse import parse_qsl, quote, urlencode

from . import edge, session

__all__ = [
    "DEFAULT_UPLOAD_LIMIT_BYTES",
    "RunningServer",
    "build_wsgi",
    "is_loopback",
    "make_server",
    "resolve_token",
    "serve",
    "startup_warnings",
]

DEFAULT_UPLOAD_LIMIT_BYTES = 128 * 1024 * 1024
DEFAULT_THREADS = 8
# waitress accepts 100 open connections by default; a browser tab keeps up to 6, so 100 is about 16 tabs.
# Past the limit new connections wait unanswered. 512 stays well under the usual 1024 open-file limit.
DEFAULT_CONNECTION_LIMIT = 512
_LOOPBACK_NAMES = ("localhost", "127.0.0.1", "[::1]")
_SECURITY_HEADERS = (
    ("X-Content-Type-Options", "nosniff"),
    ("X-Frame-Options", "DENY"),
    ("Referrer-Policy", "no-referrer"),
    ("Content-Security-Policy", "frame-ancestors 'none'"),
)

WSGIApp = Callable[[dict, Callable], Iterable[bytes]]


def is_loopback(host: str) -> bool:
    """True for ``localhost`` and loopback addresses (127.0.0.0/8, ::1)."""
    h = host.strip("[]").lower()
    if h == "localhost":
        return True
    try:
        return ipaddress.ip_address(h).is_loopback
    except ValueError:
        return False


def _is_wildcard(host: str) -> bool:
    return host.strip("[]") in ("0.0.0.0", "::", "")


def _host_label(host: str) -> str:
    """``host`` as it appears in a Host header: IPv6 literals in brackets, lower case."""
    h = host.strip("[]").lower()
    try:
        if ipaddress.ip_address(h).version == 6:
            return f"[{h}]"
    except ValueError:
        pass
    return h


def _machine_names() -> set[str]:
    """Names and addresses other machines may use to reach this one (for wildcard binds)."""
    names: set[str] = set()
    for n in {socket.gethostname(), socket.getfqdn()}:
        if not n:
            continue
        names.add(n.lower())
        try:
            for info in socket.getaddrinfo(n, None):
                names.add(_host_label(info[4][0]))
        except OSError:
            pass
    return names


def allowed_host_headers(host: str, port: int, extra: Iterable[str] = ()) -> frozenset[str]:
    """Every Host header value the guard accepts for a server bound to ``host``:``port``."""
    labels: set[str] = set()
    if is_loopback(host):
        labels.update(_LOOPBACK_NAMES)
        labels.add(_host_label(host))
    elif _is_wildcard(host):
        labels.update(_LOOPBACK_NAMES)
        labels.update(_machine_names())
    else:
        labels.add(_host_label(host))
    labels.update(_host_label(e) for e in extra)
    values = {f"{label}:{port}" for label in labels}
    if port == 80:  # browsers leave the default port out
        values.update(labels)
    return frozenset(values)


@dataclass
class _Guard:
    """WSGI middleware: Host check, access token, security headers."""

    app: WSGIApp
    allowed_hosts: frozenset[str]
    token: str | None
    cookie_name: str
    session_cookie: str = "degreescope_session"
    refused: dict[str, int] = field(default_factory=lambda: {"host": 0, "token": 0})

    def __call__(self, environ: dict, start_response: Callable) -> Iterable[bytes]:
        host = environ.get("HTTP_HOST", "").strip().lower()
        if host not in self.allowed_hosts:
            self.refused["host"] += 1
            return _plain(start_response, "421 Misdirected Request", "This server does not answer to that host name.\n")
        path = environ.get("PATH_INFO", "")
        if _suspicious_path(path):
            return _plain(start_response, "404 Not Found", "Not found.\n")
        if self.token is not None:
            query = environ.get("QUERY_STRING", "")
            pairs = parse_qsl(query, keep_blank_values=True)
            offered = [v for k, v in pairs if k == "token"]
            if offered and self._matches(offered[-1]):
                rest = urlencode([(k, v) for k, v in pairs if k != "token"])
                location = quote(environ.get("SCRIPT_NAME", "") + environ.get("PATH_INFO", "/")) + (
                    "?" + rest if rest else ""
                )
                cookie = f"{self.cookie_name}={self.token}; Path=/; HttpOnly; SameSite=Strict"
                return _plain(
                    start_response,
                    "303 See Other",
                    "Signed in; continue to the dashboard.\n",
                    [("Location", location or "/"), ("Set-Cookie", cookie), ("Cache-Control", "no-store")],
                )
            if not self._matches(self._cookie(environ, self.cookie_name)):
                self.refused["token"] += 1
                return _plain(
                    start_response,
                    "403 Forbidden",
                    "Open the address with ?token=... that the server printed when it started.\n",
                )

        sid = self._cookie(environ, self.session_cookie)
        new_cookie = None
        if not session.is_session_id(sid):
            sid = session.new_session_id()
            if environ.get("HTTP_SEC_FETCH_SITE", "").lower() != "cross-site":
                new_cookie = f"{self.session_cookie}={sid}; Path=/; HttpOnly; SameSite=Strict"

        def start_with_headers(status, headers, exc_info=None):
            present = {k.lower() for k, _ in headers}
            headers = list(headers) + [(k, v) for k, v in _SECURITY_HEADERS if k.lower() not in present]
            if new_cookie:
                headers.append(("Set-Cookie", new_cookie))
            return start_response(status, headers, exc_info) if exc_info else start_response(status, headers)

        if environ.get("REQUEST_METHOD") == "POST" and path.endswith(edge.CALLBACK_ROUTE):
            with session.bound(sid):
                return self.app(environ, start_with_headers)
        return self.app(environ, start_with_headers)

    def _matches(self, candidate: str | None) -> bool:
        if not candidate or self.token is None:
            return False
        return hmac.compare_digest(candidate.encode("utf-8", "surrogateescape"), self.token.encode("utf-8"))

    @staticmethod
    def _cookie(environ: dict, name: str) -> str | None:
        raw = environ.get("HTTP_COOKIE")
        if not raw:
            return None
        jar = SimpleCookie()
        try:
            jar.load(raw)
        except CookieError:
            return None
        morsel = jar.get(name)
        return morsel.value if morsel is not None else None


def _suspicious_path(path: str) -> bool:
    """Dot segments, backslashes or NUL in an (already percent-decoded) path: refused before routing."""
    if "\\" in path or "\x00" in path:
        return True
    return any(seg in (".", "..") for seg in path.split("/"))


def _plain(start_response, status: str, text: str, extra: list[tuple[str, str]] | None = None) -> list[bytes]:
    body = text.encode("utf-8")
    headers = [("Content-Type", "text/plain; charset=utf-8"), ("Content-Length", str(len(body)))]
    headers += list(_SECURITY_HEADERS) + (extra or [])
    start_response(status, headers)
    return [body]


def build_wsgi(
    dash_app: Any,
    *,
    host: str,
    port: int,
    token: str | None = None,
    allowed_hosts: Iterable[str] = (),
) -> WSGIApp:
    """Wrap a Dash app (or any WSGI app, or a Flask app) in the Host and token guard.

    ``token=None`` turns the token check off; the caller decides (see ``serve``).
    """
    inner = getattr(dash_app, "server", dash_app)  # a Dash app's Flask server, or a WSGI app itself
    if inner is not dash_app and hasattr(inner, "register_error_handler"):
        _answer_unknown_scripts_with_404(inner)
        _answer_malformed_callbacks_with_400(inner)
        store = getattr(getattr(dash_app, "degreescope_service", None), "store", None)
        edge.install(inner, store)
    return _Guard(
        app=inner,
        allowed_hosts=allowed_host_headers(host, port, allowed_hosts),
        token=token,
        cookie_name=f"degreescope_token_{port}",
        session_cookie=session.cookie_name(port),
    )


def _answer_unknown_scripts_with_404(flask_app: Any) -> None:
    """Dash raises DependencyException (a 500) for a script path it did not register; answer 404."""
    from dash.exceptions import DependencyException

    def not_found(_exc):
        return "Not found.\n", 404, {"Content-Type": "text/plain; charset=utf-8"}

    flask_app.register_error_handler(DependencyException, not_found)


_MALFORMED = (KeyError, IndexError, TypeError, AttributeError, ValueError)


def _answer_malformed_callbacks_with_400(flask_app: Any) -> None:
    """A callback request whose outputs, inputs or state do not match a registered callback makes Dash
    raise one of ``_MALFORMED`` or a CallbackException while it unpacks the request (a 500). The callbacks
    themselves turn every exception into a message in their panel, so on the callback route these come from
    the request: 400.
    Elsewhere they stay 500s, logged with their traceback."""
    from dash.exceptions import CallbackException, InvalidCallbackReturnValue, PreventUpdate
    from flask import request
    from werkzeug.exceptions import HTTPException

    def malformed(exc):
        if isinstance(exc, HTTPException):  # werkzeug's BadRequestKeyError is both a KeyError and a 400
            return exc
        if isinstance(exc, PreventUpdate):
            return "", 204
        if request.path.endswith("/_dash-update-component") and not isinstance(exc, InvalidCallbackReturnValue):
            flask_app.logger.warning("refused a malformed callback request: %s: %s", type(exc).__name__, exc)
            return (
                "This request does not match any of the dashboard's callbacks.\n",
                400,
                {"Content-Type": "text/plain; charset=utf-8"},
            )
        flask_app.logger.error("Exception on %s [%s]", request.path, request.method, exc_info=exc)
        return "Internal server error.\n", 500, {"Content-Type": "text/plain; charset=utf-8"}

    for cls in (*_MALFORMED, CallbackException):  # CallbackException: "Inputs do not match callback definition"
        flask_app.register_error_handler(cls, malformed)


@dataclass
class RunningServer:
    """A bound waitress server. ``run()`` blocks; ``start()`` runs it in a thread; ``stop()`` ends it."""

    server: Any
    host: str
    port: int
    token: str | None
    guard: _Guard
    _thread: threading.Thread | None = None

    @property
    def url(self) -> str:
        shown = _host_label(self.host)
        if _is_wildcard(self.host):
            shown = _host_label(socket.gethostname() or "127.0.0.1")
        base = f"http://{shown}:{self.port}/"
        return base + (f"?token={self.token}" if self.token else "")

    def run(self) -> None:
        self.server.run()

    def start(self) -> RunningServer:
        self._thread = threading.Thread(target=self.server.run, name="degreescope-waitress", daemon=True)
        self._thread.start()
        return self

    def stop(self, timeout: float = 5.0) -> None:
        from waitress import wasyncore

        self.server.task_dispatcher.shutdown(timeout=timeout)
        if self._thread is not None and self._thread.is_alive():
            # close the sockets from the loop's own thread: closing them under its select() fails there (EBADF)
            self.server.trigger.pull_trigger(lambda: wasyncore.close_all(self.server._map))
            self._thread.join(timeout)
        if self.server._map:
            wasyncore.close_all(self.server._map)


def resolve_token(host: str, token: str | None) -> str | None:
    """``"auto"``: a fresh random token for a non-loopback bind, none for loopback; otherwise as given."""
    if token == "auto":
        return None if is_loopback(host) else secrets.token_urlsafe(24)
    return token


def startup_warnings(host: str, *, token: str | None, debug: bool) -> list[str]:
    """What ``serve`` prints to stderr before it starts (empty for a plain loopback bind)."""
    out: list[str] = []
    if not is_loopback(host):
        out.append(
            f"serving on {host}, not on this machine's loopback address. The dashboard has no login: "
            "anyone who can reach this port can use it and see the loaded data."
        )
        if token is None:
            out.append("the access token is turned off (--no-token); nothing stops other people using the dashboard.")
        if debug:
            out.append("debug mode shows tracebacks to anyone who can reach the port.")
    return out


def make_server(
    dash_app: Any,
    *,
    host: str = "127.0.0.1",
    port: int = 8050,
    threads: int = DEFAULT_THREADS,
    token: str | None = "auto",
    allowed_hosts: Iterable[str] = (),
    max_request_body_size: int | None = None,
    connection_limit: int = DEFAULT_CONNECTION_LIMIT,
) -> RunningServer:
    """Bind a waitress server for ``dash_app`` (port 0 picks a free port).

    ``connection_limit`` caps open connections (idle keep-alive ones count; waitress
    closes those after 120 s); more wait unanswered until one closes.

    ``token="auto"`` makes a token for non-loopback binds and none for loopback;
    ``None`` turns it off; any other string is used as the token.
    """
    from waitress import create_server

    token = resolve_token(host, token)
    holder: dict[str, WSGIApp] = {}

    def late(environ, start_response):  # the guard needs the port, known only after binding
        return holder["app"](environ, start_response)

    kw: dict[str, Any] = {"threads": int(threads), "ident": "degreescope", "connection_limit": int(connection_limit)}
    if max_request_body_size is not None:
        kw["max_request_body_size"] = int(max_request_body_size)
    srv = create_server(late, host=host, port=int(port), **kw)
    bound_port = int(srv.effective_port)
    guard = build_wsgi(dash_app, host=host, port=bound_port, token=token, allowed_hosts=allowed_hosts)
    holder["app"] = guard
    return RunningServer(server=srv, host=host, port=bound_port, token=token, guard=guard)


def serve(
    data_path: str | None = None,
    *,
    host: str = "127.0.0.1",
    port: int = 8050,
    threads: int = DEFAULT_THREADS,
    debug: bool = False,
    token: str | None = "auto",
    upload_limit_bytes: int = DEFAULT_UPLOAD_LIMIT_BYTES,
    allowed_hosts: Iterable[str] = (),
    out=None,
    err=None,
) -> None:
    """Build the dashboard on ``data_path``, print its address, and serve until interrupted."""
    out = out or sys.stdout
    err = err or sys.stderr
    from . import create_app  # dash and plotly are imported only here

    dash_app = create_app(data_path, upload_limit_bytes=int(upload_limit_bytes))
    if debug:
        dash_app.enable_dev_tools(debug=True, dev_tools_hot_reload=False)
    else:
        dash_app.enable_dev_tools(debug=False)
    for line in startup_warnings(host, token=token, debug=debug):
        print("warning: " + line, file=err)
    running = make_server(
        dash_app,
        host=host,
        port=port,
        threads=threads,
        token=token,
        allowed_hosts=allowed_hosts,
        max_request_body_size=int(upload_limit_bytes) * 4 // 3 + (1 << 20),
    )
    print(f"degreescope dashboard: {running.url}", file=out, flush=True)
    print("Press Ctrl+C to stop.", file=err, flush=True)
    try:
        running.run()
    except KeyboardInterrupt:
        pass
    finally:
        running.stop()
