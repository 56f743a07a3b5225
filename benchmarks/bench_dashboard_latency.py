"""Dashboard latency of a degree change at 100,000 rows: server time and key-press-to-chart time.

Targets: the server answers a degree change in <= 50 ms; the fit chart changes in the
browser <= 150 ms after the key press.

For each of two apps, serving the invented cooling-loop log
(``sample_data/make_samples.py --large 100000``):

* **degreescope**: ``app.create_app`` (cached sweep, a few hundred curve points sent as a
  ``dash.Patch``, points sampled to <= 20,000 and left untouched);
* **naive**: a minimal app defined below that, on every change, re-runs the sweep and the
  precise fit and resends a full figure holding every point.

Each app is served by waitress on 127.0.0.1 (a free port) in a thread. Debian's headless
Chromium (Playwright, never ``playwright install``) presses ArrowRight on the degree
slider's thumb N times; the page records the time from the keydown event to the moment
``gd._fullData`` of the fit chart holds a different curve. A WSGI wrapper times each
degree-change request on the server. Median and p95 are printed for both.

    python benchmarks/bench_dashboard_latency.py [--rows 100000] [--presses 15]
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from browser_support import ServerThread, browser_problem, chromium  # noqa: E402

# ----------------------------------------------------------------------------
# server-side timing


class Timed:
    """WSGI wrapper: wall time of each Dash callback request whose outputs match ``marker``."""

    def __init__(self, wsgi, marker: str):
        self.wsgi, self.marker = wsgi, marker
        self.times: list[float] = []
        self.lock = threading.Lock()

    def __call__(self, environ, start_response):
        if environ.get("PATH_INFO", "").endswith("/_dash-update-component"):
            size = int(environ.get("CONTENT_LENGTH") or 0)
            body = environ["wsgi.input"].read(size)
            import io

            environ["wsgi.input"] = io.BytesIO(body)
            try:
                output = json.loads(body).get("output", "")
            except ValueError:
                output = ""
            if self.marker in output:
                t0 = time.perf_counter()
                chunks = list(self.wsgi(environ, start_response))  # includes serialising the answer
                with self.lock:
                    self.times.append(time.perf_counter() - t0)
                return chunks
        return self.wsgi(environ, start_response)


# ----------------------------------------------------------------------------
# the naive app: refit and resend everything on every change


def naive_app(path: Path):
    import dash
    import plotly.graph_objects as go
    from dash import Input, Output, dcc, html

    import fitting

    sel = fitting.read_table(path).select()
    x, y = sel.x, sel.y
    app = dash.Dash(__name__ + ".naive")
    app.layout = html.Div(
        [
            dcc.Slider(id="degree", min=0, max=20, step=1, value=0, updatemode="mouseup"),
            html.Div(id="naive-readout"),
            dcc.Graph(id="fit-chart"),
            dcc.Graph(id="error-chart"),
        ]
    )

    @app.callback(
        Output("fit-chart", "figure"),
        Output("error-chart", "figure"),
        Output("naive-readout", "children"),
        Input("degree", "drag_value"),
        Input("degree", "value"),
    )
    def everything(drag, value):
        d = int(drag if drag is not None else (value or 0))
        sweep = fitting.sweep_degrees(x, y, degrees=range(0, 21), holdout=0.25, seed=0)
        fit = fitting.fit_polynomial(x, y, d)
        grid = np.linspace(x.min(), x.max(), 400)
        lo, hi = fit.band(grid, "confidence")
        fig = go.Figure(
            [
                go.Scattergl(x=x, y=y, mode="markers", name="points"),
                go.Scatter(x=grid, y=lo, mode="lines"),
                go.Scatter(x=grid, y=hi, mode="lines", fill="tonexty"),
                go.Scatter(x=grid, y=fit.predict(grid), mode="lines", name=f"degree {d}"),
            ]
        )
        fig.update_layout(title=f"Degree {d} fit")
        err = go.Figure([go.Scatter(x=sweep.degrees, y=sweep.test_rmse), go.Scatter(x=[d], y=[sweep.test_rmse[d]])])
        return fig, err, f"degree {d}"

    app.naive_curve_index = 3
    return app


# ----------------------------------------------------------------------------
# the browser side

JS_ARM = """(idx) => {
    const gd = document.querySelector('#fit-chart .js-plotly-plot');
    const sum = () => {
        const y = gd._fullData[idx].y; let s = 0;
        for (let i = 0; i < y.length; i++) s += y[i];
        return s + y.length;
    };
    window.__bench = {t0: null, t1: null, before: sum()};
    const onKey = () => { if (window.__bench.t0 === null) window.__bench.t0 = performance.now(); };
    document.addEventListener('keydown', onKey, {capture: true, once: true});
    const poll = () => {
        if (window.__bench.t0 !== null && gd._fullData && gd._fullData[idx] && sum() !== window.__bench.before) {
            window.__bench.t1 = performance.now(); return;
        }
        requestAnimationFrame(poll);
    };
    requestAnimationFrame(poll);
}"""


def measure(browser, url: str, curve_index: int, presses: int, settle_ms: int) -> list[float]:
    page = browser.new_page(viewport={"width": 1500, "height": 1200})
    page.set_default_timeout(60_000)
    started = time.perf_counter()
    page.goto(url)
    page.wait_for_function(
        "(i) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');"
        " return !!(gd && gd._fullData && gd._fullData[i] && gd._fullData[i].y && gd._fullData[i].y.length); }",
        arg=curve_index,
    )
    print(
        f"  page opened to first fit chart (data already read, sweep computed on request): "
        f"{(time.perf_counter() - started) * 1000:.0f} ms"
    )
    page.wait_for_timeout(1500)
    thumb = page.locator("#degree [role=slider]")
    thumb.focus()
    page.keyboard.press("Home")
    page.wait_for_timeout(2500)
    out = []
    for _ in range(presses):
        page.evaluate(JS_ARM, curve_index)
        page.keyboard.press("ArrowRight")
        page.wait_for_function("() => window.__bench.t1 !== null")
        out.append(page.evaluate("() => window.__bench.t1 - window.__bench.t0"))
        page.wait_for_timeout(settle_ms)  # let the other callbacks of this change finish
    page.close()
    return out


def summary(label: str, values_ms: list[float]) -> str:
    v = sorted(values_ms)
    p95 = v[min(len(v) - 1, int(round(0.95 * (len(v) - 1))))]
    return f"{label:<44} n={len(v):3d}  median {statistics.median(v):8.1f} ms   p95 {p95:8.1f} ms"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--presses", type=int, default=15)
    ap.add_argument("--settle-ms", type=int, default=400)
    ap.add_argument(
        "--naive-max-rows",
        type=int,
        default=200_000,
        help="skip the naive comparison above this many rows: it resends every point and the page stalls",
    )
    args = ap.parse_args(argv)

    problem = browser_problem()
    if problem:
        print(f"cannot run: {problem}", file=sys.stderr)
        return 2
    path = ROOT / "sample_data" / "generated" / f"sensor_log_{args.rows}.csv"
    if not path.exists():
        subprocess.run(
            [sys.executable, str(ROOT / "sample_data" / "make_samples.py"), "--large", str(args.rows)], check=True
        )

    from playwright.sync_api import sync_playwright

    import app as dashboard

    ours = dashboard.create_app(str(path))
    ours_timed = Timed(ours.server.wsgi_app, "degree-readout.children@")
    ours.server.wsgi_app = ours_timed
    runs = [("degreescope", ours, ours_timed, 6, args.settle_ms)]
    if args.rows <= args.naive_max_rows:
        naive = naive_app(path)
        naive_timed = Timed(naive.server.wsgi_app, "naive-readout.children")
        naive.server.wsgi_app = naive_timed
        runs.append(("naive (refit + resend everything)", naive, naive_timed, naive.naive_curve_index, args.settle_ms))
    else:
        print(f"(naive comparison skipped above {args.naive_max_rows:,} rows: it resends every point)")

    results = {}
    with sync_playwright() as p, chromium(p) as browser:
        for name, dash_app, timed, idx, settle in runs:
            srv = ServerThread(dash_app.server).start()
            try:
                timed.times.clear()
                browser_ms = measure(browser, srv.url, idx, args.presses, settle)
                results[name] = (browser_ms, [t * 1000 for t in timed.times])
            finally:
                srv.stop()

    print(f"Degree change latency, {args.rows:,} rows, {args.presses} ArrowRight presses each")
    print("(server: one degree-change callback request; browser: keydown to a new curve in gd._fullData)")
    for name, (b, s) in results.items():
        print(summary(f"{name}: server", s))
        print(summary(f"{name}: key press to chart", b))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
