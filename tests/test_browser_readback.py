"""The calibration panels in real headless Chromium (Debian's /usr/bin/chromium, driven by Playwright).

A reading typed into the read-back panel gives x0 and its calibration interval, and its dashed
line and shaded interval appear in the fit chart's ``layout.shapes``; a degree change moves them.
The standards table shows, and a failing standard is marked on the fit chart. The expected x0
comes from the engine's own fit, checked against numpy's polynomial roots (numpy reference).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from browser_support import ARTIFACTS, ServerThread, chart_title, wait_for_title
from conftest import SAMPLES

pytestmark = [pytest.mark.browser, pytest.mark.slow]

FIT = "fit-chart"
OWNER = "degreescope-readback"  # views_calibration.READINGS_OWNER

JS_SHAPES = """() => {
    const gd = document.querySelector('#fit-chart .js-plotly-plot');
    if (!gd || !gd.layout) return null;
    return (gd.layout.shapes || []).map(s => ({name: s.name || '', type: s.type, x0: s.x0, x1: s.x1,
                                              y0: s.y0, y1: s.y1, xref: s.xref, yref: s.yref}));
}"""

JS_MARKS = """(owner) => {
    const gd = document.querySelector('#fit-chart .js-plotly-plot');
    if (!gd || !gd.data) return null;
    const t = gd.data.filter(d => d.meta && d.meta.owner === owner);
    return t.map(d => ({x: Array.from(d.x), y: Array.from(d.y), name: d.name}));
}"""


@pytest.fixture(scope="module")
def server():
    import app

    srv = ServerThread(app.create_app(upload_limit_bytes=1 << 20).server).start()
    yield srv
    srv.stop()


def open_page(browser, server, width: int = 1500):
    ctx = browser.new_context(viewport={"width": width, "height": 1300}, accept_downloads=True)
    pg = ctx.new_page()
    pg.set_default_timeout(20_000)
    pg.goto(server.url)
    wait_for_title(pg, FIT, "Degree")
    return ctx, pg


def reading_shapes(page) -> list[dict]:
    return [s for s in page.evaluate(JS_SHAPES) or [] if s["name"].startswith(OWNER)]


def wait_reading_line(page, y0: float) -> None:
    page.wait_for_function(
        """([owner, y]) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');
            return !!gd && (gd.layout.shapes || []).some(s => (s.name || '').startsWith(owner)
                   && s.type === 'line' && s.yref === 'y' && Math.abs(s.y0 - y) < 1e-9); }""",
        arg=[OWNER, y0],
    )


def set_degree(page, d: int) -> None:
    handle = page.locator("#degree [role=slider]")
    handle.focus()
    now = int(handle.get_attribute("aria-valuenow"))
    key = "ArrowRight" if d > now else "ArrowLeft"
    for _ in range(abs(d - now)):
        page.keyboard.press(key)
    wait_for_title(page, FIT, f"Degree {d} fit")


def engine_x0(degree: int, y0: float) -> float:
    """x0 from numpy's roots of the engine's power-basis fit on every row of the sample (numpy reference)."""
    import fitting

    table = fitting.read_table(SAMPLES / "sensor_calibration.csv")
    x_name, y_name = table.default_xy()
    sel = table.select(x_name, y_name)
    fit = fitting.fit_polynomial(sel.x, sel.y, degree)
    coef = np.array(fit.coefficients, dtype=float)
    coef[0] -= y0
    roots = np.polynomial.polynomial.polyroots(coef)
    lo, hi = fit.domain
    real = [r.real for r in roots if abs(r.imag) < 1e-9 and lo <= r.real <= hi]
    assert len(real) == 1
    return real[0]


def x_cell(page) -> float:
    return float(page.locator("#readback-result tbody tr").first.locator("td").nth(1).inner_text())


def test_reading_gives_x0_interval_and_a_line_that_follows_the_degree(browser, server):
    ctx, page = open_page(browser, server)
    try:
        set_degree(page, 2)
        others = [s for s in page.evaluate(JS_SHAPES) if not s["name"].startswith(OWNER)]
        # (the chart's own shapes, such as the extrapolation zones when the chart draws them there, are kept)
        page.fill("#readback-input", "40")
        wait_reading_line(page, 40.0)
        assert [s for s in page.evaluate(JS_SHAPES) if not s["name"].startswith(OWNER)] == others
        row = page.locator("#readback-result tbody tr").first.inner_text()
        assert "95 % calibration interval" in page.inner_text("#readback-result thead")
        assert "…" in row
        x_deg2 = x_cell(page)
        assert x_deg2 == pytest.approx(engine_x0(2, 40.0), rel=1e-6)  # 8 significant digits on the page
        shapes = reading_shapes(page)
        band = [s for s in shapes if s["type"] == "rect"]
        assert len(band) == 1 and band[0]["xref"] == "x" and band[0]["yref"] == "paper"
        assert band[0]["x0"] < x_deg2 < band[0]["x1"]
        assert "support" in page.inner_text(".readback .cal-caution")  # the calibration caution, one line
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "readback-1500.png"), full_page=True)

        set_degree(page, 3)
        page.wait_for_function(
            "(x) => { const c = document.querySelector('#readback-result tbody tr td:nth-child(2)');"
            " return !!c && parseFloat(c.innerText) !== x; }",
            arg=x_deg2,
        )
        x_deg3 = x_cell(page)
        wait_reading_line(page, 40.0)
        assert "Degree 3 fit" in chart_title(page, FIT)  # the patch left the chart's own texts as they were
        assert x_deg3 == pytest.approx(engine_x0(3, 40.0), rel=1e-6)
        band3 = [s for s in reading_shapes(page) if s["type"] == "rect"]
        assert len(band3) == 1 and band3[0]["x0"] < x_deg3 < band3[0]["x1"]
        assert "Degree 3 fit" in page.inner_text("#readback-note") or "degree 3" in page.inner_text("#readback-note")

        # a new split redraws the whole fit chart: the marks come back, the same x0 (every row is fitted)
        page.get_by_text("k-fold cross-validation", exact=True).click()
        wait_for_title(page, "error-chart", "10-fold cross-validation")
        wait_reading_line(page, 40.0)
        assert x_cell(page) == pytest.approx(x_deg3, rel=1e-9)

        page.fill("#readback-input", "40, abc")  # a refused reading: the message, and no marks left behind
        page.wait_for_selector("#readback-result .error")
        assert "'abc' is not a number" in page.inner_text("#readback-result")
        page.wait_for_function(
            "(owner) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');"
            " return !(gd.layout.shapes || []).some(s => (s.name || '').startsWith(owner)); }",
            arg=OWNER,
        )
        page.fill("#readback-input", "40")
        wait_reading_line(page, 40.0)
        page.fill("#readback-level", "90")  # the box is the page's interval level: the address keeps it
        page.wait_for_function("() => document.querySelector('#readback-result thead').innerText.includes('90 %')")
        page.wait_for_function("() => window.location.search.includes('level=90')")
        ctx2 = browser.new_context(viewport={"width": 1500, "height": 1300})
        try:
            other = ctx2.new_page()
            other.goto(page.url)  # the shared address restores the level into the box
            other.wait_for_function(
                "() => { const el = document.getElementById('readback-level'); return !!el && el.value === '90'; }"
            )
        finally:
            ctx2.close()
        with page.expect_download() as dl:  # the HTML report carries the reading and the standards
            page.click("#report-button")
        report = Path(dl.value.path()).read_text(encoding="utf-8")
        assert "Read-back of unknowns" in report and "90 % calibration interval" in report
        assert "Back-calculated standards" in report
        page.fill("#readback-input", "")  # clearing the readings takes the marks off the chart
        page.wait_for_function(
            "(owner) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');"
            " return !(gd.layout.shapes || []).some(s => (s.name || '').startsWith(owner)); }",
            arg=OWNER,
        )
    finally:
        ctx.close()


def test_standards_table_and_a_failing_standard_marked(browser, server):
    ctx, page = open_page(browser, server)
    try:
        page.set_input_files("#upload input[type=file]", str(SAMPLES / "dose_response.csv"))
        wait_for_title(page, FIT, "absorbance")
        set_degree(page, 2)  # the quadratic misses the low doses of this curve that levels off
        page.wait_for_function(
            "() => document.querySelectorAll('#standards-table tbody tr').length === 30"
            " && document.getElementById('standards-note').innerText.includes('degree 2 fit')"
        )
        rows = page.locator("#standards-table tbody tr")
        assert rows.count() == 30
        assert "blank" in page.inner_text("#standards-table").lower() or "not judged" in page.inner_text(
            "#standards-table"
        )
        summary = page.inner_text("#standards-summary")
        assert "Not accepted" in summary and "levels pass" in summary
        page.wait_for_function(
            "(owner) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');"
            " return !!gd && gd.data.some(d => d.meta && d.meta.owner === owner); }",
            arg="degreescope-standards",
        )
        marks = page.evaluate(JS_MARKS, "degreescope-standards")
        assert "Degree 2 fit" in chart_title(page, FIT)
        failing = page.locator("#standards-table td.cal-fail").count()
        assert len(marks) == 1 and len(marks[0]["x"]) == failing > 0
        assert page.locator("#weighting-table tbody tr").count() == 5
        page.screenshot(path=str(ARTIFACTS / "standards-1500.png"), full_page=True)
    finally:
        ctx.close()
