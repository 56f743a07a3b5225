"""Nothing clipped: the page at 1024 and 1440 px wide in real headless Chromium (Debian's /usr/bin/chromium).

Checks, on the sample data, on a file with long column names and in ordered-holdout mode:
* no table, cell, caption, paragraph or label overflows its own box (``scrollWidth > clientWidth``),
  except elements deliberately set to scroll (computed ``overflow-x`` auto or scroll);
* no table sticks out of its panel;
* every text of each chart (title, legend, caption, axis titles, the "recommended" label) lies inside
  the chart's drawing (point labels inside the plotting area, which clips them).
Screenshots go to pytest's temporary directory and, when it exists, to tests/artifacts/.
The calibration file with long names is invented for this test.
"""

from __future__ import annotations

import pytest
from browser_support import ARTIFACTS, ServerThread, wait_for_title

pytestmark = [pytest.mark.browser, pytest.mark.slow]

WIDTHS = (1024, 1440)
LONG_X = "Applied pressure at the reference port, gauge, after the warm-up soak (kPa)"
LONG_Y = "Bridge output after temperature compensation and linearisation stage (kΩ)"

JS_OVERFLOW = """() => {
    const bad = [];
    const scrolls = (el) => ['auto', 'scroll'].includes(getComputedStyle(el).overflowX);
    const sel = '.page table, .page th, .page td, .page p, .page li, .page label, .page h2, .page h3, ' +
                '.page .rec-degree, .page .readout, .page .equation';
    for (const el of document.querySelectorAll(sel)) {
        if (!el.offsetParent || scrolls(el)) continue;
        if (el.scrollWidth > el.clientWidth + 1) {
            bad.push(`${el.tagName}.${el.className}: ${el.scrollWidth} > ${el.clientWidth}: ` +
                     el.innerText.slice(0, 60));
        }
    }
    for (const t of document.querySelectorAll('.page table')) {
        const panel = t.closest('.panel, .chart-card');
        if (!panel || !t.offsetParent) continue;
        const a = t.getBoundingClientRect(), b = panel.getBoundingClientRect();
        if (a.right > b.right + 1 || a.left < b.left - 1) {
            bad.push(`table ${t.className} sticks out of its panel: ${a.right} > ${b.right}`);
        }
    }
    return bad;
}"""

JS_CHART_TEXT = """() => {
    const bad = [];
    for (const gd of document.querySelectorAll('.js-plotly-plot')) {
        const svg = gd.querySelector('.main-svg');
        if (!svg) continue;
        const box = svg.getBoundingClientRect();
        const area = gd.querySelector('.bglayer .bg');
        const plot = area ? area.getBoundingClientRect() : box;
        const owner = gd.closest('[id]') ? gd.closest('[id]').id : '?';
        for (const t of gd.querySelectorAll('.main-svg text, .infolayer text')) {
            if (!t.textContent.trim() || t.closest('.modebar')) continue;
            const r = t.getBoundingClientRect();
            if (r.width === 0) continue;
            const inside = t.closest('.textpoint') ? plot : box;
            if (r.left < inside.left - 1 || r.right > inside.right + 1 || r.top < inside.top - 1 ||
                r.bottom > inside.bottom + 1) {
                bad.push(`${owner}: "${t.textContent.slice(0, 70)}" ${Math.round(r.left)}..${Math.round(r.right)}` +
                         ` outside ${Math.round(inside.left)}..${Math.round(inside.right)}`);
            }
        }
    }
    return bad;
}"""


@pytest.fixture(scope="module")
def server():
    import app

    srv = ServerThread(app.create_app().server).start()
    yield srv
    srv.stop()


def long_names_csv(path):
    """Invented: a pressure calibration with long, unit-bearing column names."""
    rows = [
        f"{p:.1f},{0.5 + 0.01 * p - 2e-6 * p * p + 0.002 * ((i * 7) % 5 - 2):.6f}"
        for i, p in enumerate(range(0, 1001, 50))
    ]
    path.write_text(f'"{LONG_X}","{LONG_Y}"\n' + "\n".join(rows) + "\n", encoding="utf-8")
    return path


def open_page(browser, server, width: int):
    ctx = browser.new_context(viewport={"width": width, "height": 900}, accept_downloads=True)
    page = ctx.new_page()
    page.set_default_timeout(30_000)
    page.goto(server.url)
    wait_for_title(page, "fit-chart", "Degree")
    wait_for_title(page, "error-chart", "Error by degree")
    return ctx, page


def settle(page, x_values: str = "0, 500, 1000, 1e9") -> None:
    """Type x values (one far outside the data) and wait for the model card and the prediction table."""
    page.fill("#predict-input", x_values)
    page.wait_for_function("document.querySelector('#coefficients table') !== null")
    page.wait_for_function("document.querySelectorAll('#predict-table tr.outside').length > 0")
    page.wait_for_timeout(600)  # plotly redraws after the layout settles


def shoot(page, name: str, tmp_path) -> None:
    path = tmp_path / f"{name}.png"
    page.screenshot(path=str(path), full_page=True)
    if ARTIFACTS.parent.is_dir():
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"layout-{name}.png"), full_page=True)
    assert path.stat().st_size > 10_000


def check_boxes(page, name: str) -> None:
    boxes = page.evaluate(JS_OVERFLOW)
    assert not boxes, f"{name}:\n" + "\n".join(boxes)
    assert page.evaluate("document.documentElement.scrollWidth <= window.innerWidth")  # no sideways page scroll


def chart_text_problems(page, charts=None) -> list[str]:
    problems = page.evaluate(JS_CHART_TEXT)
    return [p for p in problems if charts is None or p.split(":", 1)[0] in charts]


@pytest.mark.parametrize("width", WIDTHS)
def test_sample_page_has_nothing_clipped(browser, server, width, tmp_path):
    ctx, page = open_page(browser, server, width)
    try:
        settle(page)
        shoot(page, f"sample-{width}", tmp_path)
        check_boxes(page, f"sample-{width}")
        texts = chart_text_problems(page)
        assert not texts, "\n".join(texts)
    finally:
        ctx.close()


@pytest.mark.parametrize("width", WIDTHS)
def test_ordered_mode_has_nothing_clipped(browser, server, width, tmp_path):
    ctx, page = open_page(browser, server, width)
    try:
        page.check("#split-mode input[value=ordered]")
        wait_for_title(page, "error-chart", "ordered")
        settle(page, "0, 1000, 2000")
        shoot(page, f"ordered-{width}", tmp_path)
        check_boxes(page, f"ordered-{width}")
        texts = chart_text_problems(page)
        assert not texts, "\n".join(texts)
    finally:
        ctx.close()


def open_long_names(browser, server, width: int, tmp_path):
    ctx, page = open_page(browser, server, width)
    page.set_input_files("#upload input[type=file]", str(long_names_csv(tmp_path / "long-names.csv")))
    wait_for_title(page, "fit-chart", "Bridge output")
    settle(page)
    return ctx, page


@pytest.mark.parametrize("width", WIDTHS)
def test_long_column_names_keep_tables_cells_and_captions_inside(browser, server, width, tmp_path):
    ctx, page = open_long_names(browser, server, width, tmp_path)
    try:
        shoot(page, f"long-names-{width}", tmp_path)
        check_boxes(page, f"long-names-{width}")
        texts = chart_text_problems(page, charts=("error-chart", "residual-chart"))
        assert not texts, "\n".join(texts)
    finally:
        ctx.close()


def test_long_column_names_fit_inside_the_fit_chart(browser, server, tmp_path):
    ctx, page = open_long_names(browser, server, 1024, tmp_path)
    try:
        texts = chart_text_problems(page, charts=("fit-chart",))
        assert not texts, "\n".join(texts)
    finally:
        ctx.close()


def test_print_is_one_column_without_buttons(browser, server, tmp_path):
    ctx, page = open_page(browser, server, 1024)
    try:
        settle(page)
        page.emulate_media(media="print")
        shown = page.evaluate(
            "() => Array.from(document.querySelectorAll('button, .btn, textarea')).filter(b => b.offsetParent)"
            ".map(b => b.innerText || b.tagName)"
        )
        assert shown == []
        side, main = (page.locator(sel).bounding_box() for sel in (".side", ".main"))
        assert side["y"] + side["height"] <= main["y"] + 1  # stacked: one column
        assert main["width"] > 900
        check_boxes(page, "print")
        pdf = tmp_path / "page.pdf"
        page.pdf(path=str(pdf), format="A4")
        assert pdf.read_bytes()[:5] == b"%PDF-"
    finally:
        ctx.close()
