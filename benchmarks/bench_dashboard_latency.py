"""Dashboard latency of a degree change: key press to the new curve painted, in headless Chromium.

    .venv/bin/python benchmarks/bench_dashboard_latency.py [--rows 100000 1000000] [--presses 20]

The hard case a user meets:

* **data**: invented rows with x drawn uniformly at random over a wide range (-50 to 150),
  written unsorted, y a cubic plus noise; 100,000 and 1,000,000 rows by default
  (``benchmarks/out/wide_<rows>.csv``, labelled as invented in its first line);
* **rhythm**: arrow keys pressed back to back on the degree slider's thumb, up from degree 1
  to 12 and down again: each press is sent as soon as the previous one's curve is painted;
* **end point**: the curve trace's data in the fit chart differ from before the press, and two
  animation frames have passed since (the browser has painted it). Timed in the page, from
  the keydown event's own time stamp (``event.timeStamp``: when the browser took the key, so
  a press that waits behind earlier work counts that wait);
* **start**: the timed presses begin once the page's start-up work on the server (model card,
  evidence, verdict stability: tens of seconds at 1,000,000 rows) has ended, and its time is
  printed.

Two apps serve the same file, one after the other, in the same run:

* **degreescope** (``app.create_app``): the curve layer's traces moved in the browser from
  the per-degree frames (a plotly transition), the points in a layer of their own
  (app/layers.py, assets/degreescope-layers.js);
* **one-figure reference**: the structure degreescope had before: one graph holding a
  20,000-point WebGL sample of the rows with the curve and bands, and a server callback that
  sends the new curve and bands as a ``dash.Patch`` (the same FitService numbers).

Median and p95 of each are printed, and the ratio reference / degreescope. Targets: median
<= 150 ms at 100,000 rows and <= 200 ms at 1,000,000 rows.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from browser_support import ServerThread, browser_problem, chromium  # noqa: E402

OUT = ROOT / "benchmarks" / "out"
LOW, HIGH = 1, 12  # the presses walk the degree between these


def wide_file(rows: int) -> Path:
    """Invented rows: x uniform on [-50, 150], unsorted; y a cubic plus noise."""
    path = OUT / f"wide_{rows}.csv"
    if not path.exists():
        OUT.mkdir(parents=True, exist_ok=True)
        rng = np.random.default_rng(20261202)
        x = rng.uniform(-50.0, 150.0, rows)
        y = 3 + 0.2 * x - 0.004 * x**2 + 1.5e-5 * x**3 + rng.normal(0, 1.5, rows)
        with path.open("w") as f:
            f.write("# invented data for a latency benchmark: wide, unsorted x\nx,y\n")
            np.savetxt(f, np.c_[x, y], delimiter=",", fmt="%.6f")
    return path


def reference_app(path: Path):
    """The one-figure structure: sampled WebGL points, curve and bands in one graph; the server patches the curve."""
    import dash
    import plotly.graph_objects as go
    from dash import Input, Output, Patch, State, dcc, html

    from app.service import Columns, FitService, SplitSettings
    from app.store import DatasetStore

    service = FitService(DatasetStore(), upload_limit_bytes=1 << 30)
    info = service.load_path(path)
    cols, split = Columns(info.default_x, info.default_y), SplitSettings()
    view = service.split_view(info.id, cols, split)
    dv = service.degree_view(info.id, cols, split, LOW)
    g = view.grid
    fig = go.Figure(
        [
            go.Scattergl(x=view.train_x, y=view.train_y, mode="markers", name="training", marker=dict(size=4)),
            go.Scattergl(x=view.test_x, y=view.test_y, mode="markers", name="test", marker=dict(size=5)),
            go.Scatter(x=g, y=dv.conf_lo, mode="lines", line=dict(width=0)),
            go.Scatter(x=g, y=dv.conf_hi, mode="lines", line=dict(width=0), fill="tonexty"),
            go.Scatter(x=g, y=dv.curve, mode="lines", name="fit"),
        ],
        layout=dict(title=f"Degree {LOW} fit", height=500, uirevision="keep"),
    )
    app = dash.Dash(__name__ + ".reference")
    app.layout = html.Div(
        [
            dcc.Slider(id="degree", min=0, max=20, step=1, value=LOW, updatemode="mouseup"),
            dcc.Graph(id="fit-chart", figure=fig),
            dcc.Store(id="key", data=info.id),
        ]
    )

    @app.callback(
        Output("fit-chart", "figure"), Input("degree", "value"), State("key", "data"), prevent_initial_call=True
    )
    def degree(value, ds):
        v = service.degree_view(ds, cols, split, int(value))
        p = Patch()
        for i, a in ((2, v.conf_lo), (3, v.conf_hi), (4, v.curve)):
            p["data"][i]["y"] = np.asarray(a, dtype=np.float32)
        p["layout"]["title"]["text"] = f"Degree {v.degree} fit"
        return p

    return app


class Busy:
    """WSGI wrapper: how many requests are being answered now, and when the last one ended."""

    def __init__(self, wsgi):
        self.wsgi, self.active, self.last = wsgi, 0, time.monotonic()
        self.lock = threading.Lock()

    def __call__(self, environ, start_response):
        with self.lock:
            self.active += 1
        try:
            return list(self.wsgi(environ, start_response))
        finally:
            with self.lock:
                self.active -= 1
                self.last = time.monotonic()

    def wait_idle(self, quiet_s: float = 2.0, limit_s: float = 900.0) -> float:
        """Wait until no request has been open for ``quiet_s``; the seconds waited."""
        start = time.monotonic()
        while time.monotonic() - start < limit_s:
            with self.lock:
                idle = self.active == 0 and time.monotonic() - self.last >= quiet_s
            if idle:
                break
            time.sleep(0.2)
        return time.monotonic() - start


# the page times one press: keydown -> the curve's data changed -> two animation frames
JS_ARM = """(idx) => {
    const gd = document.querySelector('#fit-chart .js-plotly-plot');
    const sum = () => {
        const t = gd._fullData && gd._fullData[idx];
        if (!t || !t.y) return null;
        let s = 0; for (let i = 0; i < t.y.length; i++) s += t.y[i];
        return s + t.y.length;
    };
    window.__bench = {t0: null, t1: null, before: sum()};
    const stamp = (e) => { window.__bench.t0 = Math.min(e.timeStamp, performance.now()); };
    document.addEventListener('keydown', stamp, {capture: true, once: true});
    const poll = () => {
        const now = sum();
        if (window.__bench.t0 !== null && now !== null && now !== window.__bench.before) {
            requestAnimationFrame(() => requestAnimationFrame(() => { window.__bench.t1 = performance.now(); }));
            return;
        }
        requestAnimationFrame(poll);
    };
    requestAnimationFrame(poll);
}"""


def measure(browser, url: str, curve_index: int, presses: int, busy: Busy) -> list[float]:
    page = browser.new_page(viewport={"width": 1440, "height": 1200})
    page.set_default_timeout(180_000)
    started = time.perf_counter()
    page.goto(url)
    page.wait_for_function(
        "(i) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');"
        " return !!(gd && gd._fullData && gd._fullData[i] && gd._fullData[i].y && gd._fullData[i].y.length); }",
        arg=curve_index,
    )
    print(f"  first fit chart after {(time.perf_counter() - started):.1f} s", flush=True)
    thumb = page.locator("#degree [role=slider]")
    thumb.focus()
    page.keyboard.press("Home")
    for _ in range(LOW):
        page.keyboard.press("ArrowRight")
    # the page's start-up work (model card, evidence, verdict stability) ends before the timed run
    print(f"  start-up work on the server done {busy.wait_idle():.1f} s later", flush=True)
    out, up, d = [], True, LOW
    for _ in range(presses):
        if d >= HIGH or d <= LOW:
            up = d <= LOW
        page.evaluate(JS_ARM, curve_index)
        page.keyboard.press("ArrowRight" if up else "ArrowLeft")
        d += 1 if up else -1
        page.wait_for_function("() => window.__bench.t1 !== null")
        out.append(page.evaluate("() => window.__bench.t1 - window.__bench.t0"))
    page.close()
    return out


def summary(label: str, values_ms: list[float]) -> tuple[str, float]:
    v = sorted(values_ms)
    p95 = v[min(len(v) - 1, int(round(0.95 * (len(v) - 1))))]
    med = statistics.median(v)
    return f"{label:<34} n={len(v):3d}  median {med:7.1f} ms   p95 {p95:7.1f} ms", med


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, nargs="+", default=[100_000, 1_000_000])
    ap.add_argument("--presses", type=int, default=20)
    args = ap.parse_args(argv)
    problem = browser_problem()
    if problem:
        print(f"cannot run: {problem}", file=sys.stderr)
        return 2
    from playwright.sync_api import sync_playwright

    import app as dashboard
    from app import ids

    print("Key press -> new curve painted (two animation frames), arrow keys back to back, unsorted wide x")
    with sync_playwright() as p, chromium(p) as browser:
        for rows in args.rows:
            path = wide_file(rows)
            meds = {}
            for name, make, idx in (
                ("degreescope", lambda p: dashboard.create_app(str(p)), ids.FIT_TRACE_CURVE),
                ("one-figure reference", reference_app, 4),
            ):
                print(f"{rows:,} rows, {name}:", flush=True)
                dash_app = make(path)
                busy = Busy(dash_app.server.wsgi_app)
                dash_app.server.wsgi_app = busy
                srv = ServerThread(dash_app.server).start()
                try:
                    line, meds[name] = summary(f"  {name}", measure(browser, srv.url, idx, args.presses, busy))
                finally:
                    srv.stop()
                print(line, flush=True)
            ratio = meds["one-figure reference"] / meds["degreescope"]
            print(f"  {rows:,} rows: reference / degreescope = {ratio:.1f}x (median)", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
