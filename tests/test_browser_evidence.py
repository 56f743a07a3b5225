"""The evidence panel in real headless Chromium (Debian's /usr/bin/chromium, driven by Playwright).

The start-up sample (invented sensor calibration, 120 rows, no replicated x) is on screen:
the evidence table and its sentence, the verdict stability chart, the flagged rows ringed on
the fit and residual charts, and leaving a row out by its line number and putting it back.
Screenshots at 1024 and 1440 px go to tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import pytest
from browser_support import ARTIFACTS, ServerThread, wait_for_title

pytestmark = [pytest.mark.browser, pytest.mark.slow]

FIT, RES, POINTS = "fit-chart", "residual-chart", "fit-points"  # the rings sit on the fit chart's points layer
JS_RINGS = """(sel) => { const gd = document.querySelector(sel + ' .js-plotly-plot');
    if (!gd || !gd.data) return null;
    return gd.data.filter(t => t.meta === 'evidence-ring').map(t => Array.from(t.customdata || []).map(c => c[0])); }"""


@pytest.fixture(scope="module")
def server():
    import app

    srv = ServerThread(app.create_app().server).start()
    yield srv
    srv.stop()


def open_page(browser, server, width: int):
    ctx = browser.new_context(viewport={"width": width, "height": 1000})
    page = ctx.new_page()
    page.set_default_timeout(30_000)
    page.goto(server.url)
    wait_for_title(page, FIT, "Degree")
    return ctx, page


def wait_text(page, selector: str, words: str) -> None:
    page.wait_for_function(
        "([sel, w]) => { const el = document.querySelector(sel); return !!el && el.innerText.includes(w); }",
        arg=[selector, words],
    )


def rings(page, chart: str):
    return page.evaluate(JS_RINGS, f"#{chart}")


def test_evidence_stability_rings_and_a_row_left_out(browser, server):
    ctx, page = open_page(browser, server, 1440)
    try:
        wait_text(page, "#evidence-sentence", "cross-validated choice")
        assert "No lack-of-fit test here: no x level has replicates" in page.inner_text("#evidence-notes")
        assert "How the recommended degree is chosen: 10-fold cross-validation" in page.inner_text("#evidence-rule")
        assert page.locator("#evidence-table tbody tr").count() >= 4
        assert "nan" not in page.inner_text("#evidence-table").lower()
        wait_text(page, "#evidence-rows", "from 120 rows.")
        # stability: its own callback, the sentence and the bars
        wait_text(page, "#stability-text", "of 200 redraws of the folds")
        assert page.locator("#stability-chart .bars path, #stability-chart .bars .point").count() >= 1
        # rings: the flagged rows, once on each chart, with their line numbers
        page.wait_for_function(f"(s) => ({JS_RINGS})(s) && ({JS_RINGS})(s).length === 1", arg=f"#{POINTS}")
        page.wait_for_function(f"(s) => ({JS_RINGS})(s) && ({JS_RINGS})(s).length === 1", arg=f"#{RES}")
        flagged = rings(page, POINTS)[0]
        assert flagged and all(str(n) in page.inner_text("#influence-table") for n in flagged)
        # a degree change replaces the ring (removed by value), never adds a second one
        page.locator("#degree [role=slider]").focus()
        page.keyboard.press("ArrowRight")
        wait_for_title(page, RES, "Residuals at degree 4")
        for chart in (POINTS, RES):  # each ring follows its chart's own redraw; wait for it, never a second one
            page.wait_for_function(f"(s) => ({JS_RINGS})(s) && ({JS_RINGS})(s).length === 1", arg=f"#{chart}")
        page.wait_for_timeout(1000)
        assert len(rings(page, POINTS)) == 1 and len(rings(page, RES)) == 1
        page.keyboard.press("ArrowLeft")
        wait_for_title(page, RES, "Residuals at degree 3")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "evidence-1440.png"), full_page=True)
        # leave the first flagged row out, with a reason; everything in the panel refits
        line = str(flagged[0])
        page.fill("#leave-out-line", line)
        page.fill("#leave-out-reason", "thermometer not settled")
        page.click("#leave-out-button")
        wait_text(page, "#evidence-rows", "from 119 rows (1 row left out by the analyst)")
        wait_text(page, "#left-out-list", f"line {line}: thermometer not settled")
        wait_text(page, "#leave-out-notice", f"Line {line} is left out")
        wait_text(page, "#stability-text", "of 200 redraws of the folds")
        page.wait_for_function(f"(s) => ({JS_RINGS})(s) && !({JS_RINGS})(s)[0].includes({line})", arg=f"#{POINTS}")
        page.screenshot(path=str(ARTIFACTS / "evidence-left-out-1440.png"), full_page=True)
        # a typed value that is not a data line is explained, not applied
        page.fill("#leave-out-line", "3")
        page.click("#leave-out-button")
        wait_text(page, "#leave-out-notice", "Line 3 is not a data row")
        # put it back
        page.click("#left-out-list button")
        wait_text(page, "#evidence-rows", "from 120 rows.")
        wait_text(page, "#left-out-list", "No row is left out")
    finally:
        ctx.close()


def test_narrow_page_keeps_the_evidence_panel_inside(browser, server):
    ctx, page = open_page(browser, server, 1024)
    try:
        wait_text(page, "#stability-text", "of 200 redraws of the folds")
        wait_text(page, "#evidence-sentence", "cross-validated choice")
        overflow = page.evaluate(
            """() => { const p = document.getElementById('evidence').getBoundingClientRect();
                const sel = '#evidence .evidence-grid > *, #evidence .leave-out-row > *';
                return Array.from(document.querySelectorAll(sel))
                    .filter(el => el.getBoundingClientRect().right > p.right + 1).length; }"""
        )
        assert overflow == 0
        assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "evidence-1024.png"), full_page=True)
    finally:
        ctx.close()


def test_a_row_left_out_refits_the_verdict_charts_and_model_card(browser, server):
    ctx, page = open_page(browser, server, 1440)
    try:
        wait_text(page, "#measure-note", "on all 120 rows")
        wait_text(page, "#model-handover", "(120 rows)")
        page.fill("#leave-out-line", "40")
        page.fill("#leave-out-reason", "door opened during the reading")
        page.click("#leave-out-button")
        wait_text(page, "#evidence-rows", "from 119 rows")
        page.wait_for_function(
            "() => document.getElementById('measure-note').innerText.includes('on all 119 rows')", timeout=10_000
        )
        wait_text(page, "#model-handover", "(119 rows)")
        page.click("#left-out-list button")
        wait_text(page, "#measure-note", "on all 120 rows")
    finally:
        ctx.close()
