"""Helpers for driving the dashboard in Debian's headless Chromium with Playwright.

Never downloads a browser: it uses /usr/bin/chromium (or $DEGREESCOPE_CHROMIUM).
The server is waitress on 127.0.0.1 and a free port, in a thread that can be stopped.
"""

from __future__ import annotations

import os
import socket
import threading
import time
from contextlib import contextmanager
from pathlib import Path

CHROMIUM = os.environ.get("DEGREESCOPE_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-dev-shm-usage",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-quic",
    "--no-first-run",
    "--no-default-browser-check",
]
ARTIFACTS = Path(__file__).resolve().parent / "artifacts"


def browser_problem() -> str | None:
    """Why the browser tests cannot run here, or None."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "the playwright Python package is not installed"
    if not (Path(CHROMIUM).is_file() and os.access(CHROMIUM, os.X_OK)):
        return f"no Chromium at {CHROMIUM} (apt-get install -y chromium chromium-driver)"
    return None


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class ServerThread:
    """waitress serving a WSGI app on 127.0.0.1 in a daemon thread."""

    def __init__(self, wsgi_app, *, threads: int = 4):
        from waitress import create_server

        self.port = free_port()
        self.server = create_server(wsgi_app, host="127.0.0.1", port=self.port, threads=threads)
        self.thread = threading.Thread(target=self.server.run, name="waitress-test", daemon=True)

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}/"

    def start(self) -> ServerThread:
        self.thread.start()
        deadline = time.monotonic() + 10
        while time.monotonic() < deadline:
            try:
                with socket.create_connection(("127.0.0.1", self.port), timeout=0.5):
                    return self
            except OSError:
                time.sleep(0.05)
        raise RuntimeError("the test server did not start")

    def stop(self) -> None:
        self.server.close()
        self.thread.join(timeout=5)


@contextmanager
def chromium(playwright):
    """A fresh headless Chromium, closed afterwards.

    Playwright's ``launch`` gives every browser a new temporary profile (user-data-dir)
    of its own and refuses a ``--user-data-dir`` argument, so none is passed.
    """
    browser = playwright.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
    try:
        yield browser
    finally:
        browser.close()


# -- reading the page -------------------------------------------------------------

JS_TRACE = """([sel, i]) => {
    const gd = document.querySelector(sel + ' .js-plotly-plot');
    if (!gd || !gd._fullData || !gd._fullData[i]) return null;
    const t = gd._fullData[i];
    return {x: Array.from(t.x || []), y: Array.from(t.y || []), name: t.name};
}"""

JS_TITLE = """(sel) => {
    const gd = document.querySelector(sel + ' .js-plotly-plot');
    return gd && gd._fullLayout && gd._fullLayout.title ? gd._fullLayout.title.text : null;
}"""


def trace(page, chart_id: str, index: int):
    return page.evaluate(JS_TRACE, [f"#{chart_id}", index])


def chart_title(page, chart_id: str):
    return page.evaluate(JS_TITLE, f"#{chart_id}")


def wait_for_title(page, chart_id: str, contains: str, timeout: float = 40_000) -> None:
    page.wait_for_function(
        """([sel, txt]) => { const gd = document.querySelector(sel + ' .js-plotly-plot');
            return !!(gd && gd._fullLayout && gd._fullLayout.title && gd._fullLayout.title.text.includes(txt)); }""",
        arg=[f"#{chart_id}", contains],
        timeout=timeout,
    )


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG's IHDR chunk (PNG specification, ISO/IEC 15948, section 11.2.2)."""
    if data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
        raise ValueError("not a PNG file")
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
