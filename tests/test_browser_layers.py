"""The fit chart's two layers in real headless Chromium (Debian's /usr/bin/chromium, driven by Playwright).

The page serves invented data with 20,000 rows of unsorted, uniformly spread x, so that the
points layer draws densities. A key press must redraw the curve layer and nothing else (counted
by plotly's ``plotly_afterplot`` and ``plotly_animated`` events on each graph), the error chart's
ring must reach the new degree before the degree rests, the pointer must reach the points under
the transparent curve layer, a zoom on either layer must move the other, and the image of the
chart must hold both layers. Screenshots at 1024 and 1440 px go to tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import numpy as np
import pytest
from browser_support import ARTIFACTS, ServerThread, trace, wait_for_title

pytestmark = [pytest.mark.browser, pytest.mark.slow]

FIT, POINTS, ERR = "fit-chart", "fit-points", "error-chart"
CURVE = 4  # ids.FIT_TRACE_CURVE
ROWS = 20_000

COUNT_REDRAWS = """() => {
    window.__redraws = {};
    ['fit-points', 'fit-chart', 'error-chart'].forEach(id => {
        const gd = document.querySelector('#' + id + ' .js-plotly-plot');
        window.__redraws[id] = 0;
        window.__redraws[id + ' transitions'] = 0;
        gd.on('plotly_afterplot', () => { window.__redraws[id] += 1; });
        gd.on('plotly_animated', () => { window.__redraws[id + ' transitions'] += 1; });
    });
    // the counts as each key press's curve is drawn, before the degree rests and the page
    // follows it (the settled degree may rightly redraw the points layer's review rings)
    document.querySelector('#fit-chart .js-plotly-plot').on('plotly_animated', () => {
        window.__atPress = Object.assign({}, window.__redraws);
    });
}"""

# true once no Dash output has been pending for a second (Dash marks them data-dash-is-loading)
QUIET = """() => {
    const now = performance.now();
    if (document.querySelector('[data-dash-is-loading]')) { window.__busyAt = now; }
    return now - (window.__busyAt || 0) > 1000;
}"""


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    import app

    rng = np.random.default_rng(7)
    x = rng.uniform(-50.0, 150.0, ROWS)
    y = 3 + 0.2 * x - 0.004 * x**2 + 1.5e-5 * x**3 + rng.normal(0, 1.5, ROWS)
    path = tmp_path_factory.mktemp("layers") / "invented_wide_log.csv"
    with path.open("w") as f:
        f.write("# invented rows for a test of the chart's layers\nx,y\n")
        np.savetxt(f, np.c_[x, y], delimiter=",", fmt="%.6f")
    srv = ServerThread(app.create_app(str(path)).server).start()
    yield srv
    srv.stop()


def open_page(browser, server, width: int):
    ctx = browser.new_context(viewport={"width": width, "height": 1100})
    page = ctx.new_page()
    page.set_default_timeout(60_000)
    page.goto(server.url)
    wait_for_title(page, FIT, "Degree")
    page.wait_for_function("() => { const n = document.querySelector('#model-note'); return !!n && !!n.innerText; }")
    return ctx, page


def degree_title(page) -> str:
    return page.evaluate("() => document.querySelector('#fit-chart .js-plotly-plot')._fullLayout.title.text")


# where the error chart's ring is drawn and where degree d lies on its axis, in page pixels
RING_AT = """(d) => {
    const eg = document.querySelector('#error-chart .js-plotly-plot'), xa = eg._fullLayout.xaxis;
    const dot = eg.querySelectorAll('.scatterlayer .trace')[3].querySelector('path.point');  // ids.ERR_TRACE_CURRENT
    const ring = dot.getBoundingClientRect(), box = eg.getBoundingClientRect();
    return [ring.x + ring.width / 2 - box.x, xa._offset + xa.l2p(d), ring.width, ring.height];
}"""


def test_a_key_press_redraws_the_curve_layer_only(browser, server):
    ctx, page = open_page(browser, server, 1440)
    try:
        types = page.evaluate("() => document.querySelector('#fit-points .js-plotly-plot').data.map(t => t.type)")
        assert types[:2] == ["heatmap", "heatmap"]  # 20,000 rows: training and test densities
        assert "20,000 rows as a density" in page.inner_text("#fit-stack")
        page.locator("#degree [role=slider]").focus()
        page.wait_for_function(QUIET, polling=100)  # the settled work of the first draw is over
        page.evaluate(COUNT_REDRAWS)
        before = trace(page, FIT, CURVE)["y"]
        for key in ("ArrowRight", "ArrowRight", "ArrowLeft"):
            title = degree_title(page)
            page.keyboard.press(key)
            page.wait_for_function("(t) => document.querySelector('#fit-chart .js-plotly-plot')._fullLayout"
                                   ".title.text !== t", arg=title)  # fmt: skip
        d = int(page.locator("#degree [role=slider]").get_attribute("aria-valuenow"))
        assert degree_title(page).startswith(f"Degree {d} fit")
        shown = page.text_content("#fit-chart .gtitle")  # the words on screen, not only in the layout
        assert shown.startswith(f"Degree {d} fit"), shown
        assert trace(page, FIT, CURVE)["y"] != before
        ring_x, axis_x, w, h = page.evaluate(RING_AT, d)  # moved at once, before the degree rests (SETTLE_MS)
        assert abs(ring_x - axis_x) < 1.5, (ring_x, axis_x)
        assert abs(w - h) < 1, (w, h)  # round
        page.wait_for_function(
            "(d) => document.querySelector('#error-chart .js-plotly-plot')._fullData[3].x[0] === d", arg=d
        )
        redraws = page.evaluate("() => window.__atPress")
        assert redraws["fit-chart transitions"] >= 3, redraws  # one per key press
        assert redraws["fit-points"] == 0 and redraws["fit-points transitions"] == 0, redraws  # not touched
        # once the degree rests, the page follows: the model card and the address
        page.wait_for_function("(d) => location.search.includes('degree=' + d)", arg=d)
        page.wait_for_function(
            "(d) => document.querySelector('#model-note').innerText.includes('degree ' + d) ||"
            " document.querySelector('#equation').innerText.length > 0",
            arg=d,
        )
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "layers-density-1440.png"))
    finally:
        ctx.close()


def test_the_pointer_reaches_the_points_and_a_zoom_moves_both_layers(browser, server):
    ctx, page = open_page(browser, server, 1024)
    try:
        box = page.locator("#fit-points .nsewdrag").first.bounding_box()
        cx, cy = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        owner = page.evaluate(
            "([x, y]) => { const el = document.elementFromPoint(x, y); const c = el && el.closest('.dash-graph');"
            " return c ? c.id : null; }",
            [cx, cy],
        )
        assert owner == POINTS  # the curve layer above lets the pointer through
        # a drag on the plot zooms the points layer; the curve layer takes the same ranges
        page.mouse.move(cx - 80, cy - 60)
        page.mouse.down()
        page.mouse.move(cx, cy, steps=6)
        page.mouse.move(cx + 80, cy + 60, steps=6)
        page.mouse.up()
        js_range = "(id) => document.querySelector('#' + id + ' .js-plotly-plot')._fullLayout.xaxis.range.slice()"
        page.wait_for_function(
            f"() => {{ const a = ({js_range})('fit-points'), b = ({js_range})('fit-chart');"
            " return Math.abs(a[0] - b[0]) < 1e-9 && Math.abs(a[1] - b[1]) < 1e-9; }"
        )
        zoomed = page.evaluate(js_range, POINTS)
        assert zoomed[1] - zoomed[0] < 150  # narrower than the 200-wide data range
        # the image of the chart holds both layers on one opaque figure
        both = page.evaluate("() => window.degreescopeLayers.combined()")
        kinds = [t["type"] for t in both["data"]]
        assert kinds[:2] == ["heatmap", "heatmap"] and kinds.count("scatter") >= 5
        assert both["layout"]["plot_bgcolor"] == "#ffffff"
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "layers-zoomed-1024.png"))
    finally:
        ctx.close()
