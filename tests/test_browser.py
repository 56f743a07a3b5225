"""The dashboard in real headless Chromium (Debian's /usr/bin/chromium, driven by Playwright).

One server (waitress on 127.0.0.1, a free port) and one browser serve the whole module.
With CI=true a missing browser fails these tests; elsewhere they are skipped with the reason.
Screenshots go to tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import re

import pytest
from browser_support import (
    ARTIFACTS,
    ServerThread,
    chart_title,
    png_size,
    trace,
    wait_for_title,
)
from conftest import SAMPLES

pytestmark = [pytest.mark.browser, pytest.mark.slow]

UPLOAD_LIMIT = 64 * 1024  # small, so that an oversize upload is quick to make
FIT, ERR, POINTS = "fit-chart", "error-chart", "fit-points"  # POINTS: the fit chart's points layer
CURVE = 4  # ids.FIT_TRACE_CURVE


@pytest.fixture(scope="module")
def server():
    import app

    srv = ServerThread(app.create_app(upload_limit_bytes=UPLOAD_LIMIT).server).start()
    yield srv
    srv.stop()


@pytest.fixture()
def page(browser, server):
    ctx = browser.new_context(viewport={"width": 1500, "height": 1300}, accept_downloads=True)
    pg = ctx.new_page()
    pg.set_default_timeout(20_000)
    pg.dialogs = []
    pg.on("dialog", lambda d: (pg.dialogs.append(d.message), d.dismiss()))
    pg.goto(server.url)
    wait_for_title(pg, FIT, "Degree")
    wait_for_title(pg, ERR, "Error by degree")
    yield pg
    ctx.close()


def shot(page, name: str) -> None:
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"{name}.png"), full_page=True)


# the error chart's ring: the one marker of trace ids.ERR_TRACE_CURRENT
RING = "document.querySelector('#error-chart .js-plotly-plot')._fullData[3].x[0] === "


def degree_now(page) -> int:
    return int(re.match(r"Degree (\d+)", chart_title(page, FIT)).group(1))


def wait_degree(page, d: int) -> None:
    wait_for_title(page, FIT, f"Degree {d} fit")
    page.wait_for_function(
        """(d) => { const gd = document.querySelector('#error-chart .js-plotly-plot');
            const ring = gd && gd._fullData && gd._fullData[3];  // ids.ERR_TRACE_CURRENT
            return !!ring && !!ring.x && ring.x[0] === d; }""",  # the current degree's ring
        arg=d,
    )


def upload(page, path) -> None:
    page.set_input_files("#upload input[type=file]", str(path))


def wait_alert(page, nonempty: bool) -> None:
    page.wait_for_function(
        "(want) => { const el = document.getElementById('overfit-alert');"
        " return !!el && (el.innerText.trim().length > 0) === want; }",
        arg=nonempty,
    )


# ----------------------------------------------------------------------------


def test_page_loads_the_sample_with_both_charts(page):
    assert "temperature" in chart_title(page, FIT)
    rec = page.inner_text("#recommended-degree")
    assert re.search(r"\d+", rec)
    assert degree_now(page) == int(re.search(r"\d+", rec).group())  # lands on the recommended degree
    train, test = trace(page, POINTS, 0), trace(page, POINTS, 1)
    assert len(train["x"]) + len(test["x"]) == 120
    assert "10-fold cross-validation" in page.inner_text("#measure-note")
    assert "unreliable outside the range" in page.inner_text("#caution")
    assert page.locator("#overfit-alert").count() == 1
    shot(page, "01-start")


def test_keyboard_steps_move_the_fit_and_the_highlight(page):
    d0 = degree_now(page)
    before = trace(page, FIT, CURVE)["y"]
    thumb = page.locator("#degree [role=slider]")
    thumb.focus()
    page.keyboard.press("ArrowRight")
    wait_degree(page, d0 + 1)
    assert trace(page, FIT, CURVE)["y"] != before
    page.keyboard.press("ArrowLeft")
    page.keyboard.press("ArrowLeft")
    wait_degree(page, d0 - 1)
    assert thumb.get_attribute("aria-valuenow") == str(d0 - 1)
    page.wait_for_function("() => location.search.includes('degree=' + %d)" % (d0 - 1))


def test_mouse_drag_moves_the_degree(page):
    d0 = degree_now(page)
    thumb = page.locator("#degree [role=slider]").bounding_box()
    track = page.locator("#degree .dash-slider-track").bounding_box()
    page.mouse.move(thumb["x"] + thumb["width"] / 2, thumb["y"] + thumb["height"] / 2)
    page.mouse.down()
    target = track["x"] + 0.5 * track["width"]  # degree 10 of 0..20
    for i in range(1, 11):
        page.mouse.move(thumb["x"] + (target - thumb["x"]) * i / 10, thumb["y"] + thumb["height"] / 2)
        page.wait_for_timeout(30)
    page.wait_for_function(
        "(d0) => !document.querySelector('#fit-chart .js-plotly-plot')"
        "._fullLayout.title.text.startsWith('Degree ' + d0 + ' ')",
        arg=d0,
    )
    page.mouse.up()
    wait_degree(page, 10)
    page.wait_for_function("() => " + RING + "10")  # the error chart's ring sits on degree 10
    shot(page, "02-dragged-to-10")


def test_upload_with_decimal_comma_shows_intake_and_new_charts(page, tmp_path):
    f = tmp_path / "strom_messung.csv"
    rows = [
        f"{v / 10:.1f};{2 + 3 * v / 10 + 0.2 * (v / 10) ** 2 + 0.05 * ((v * 7) % 5 - 2):.3f}".replace(".", ",")
        for v in range(1, 61)
    ]
    f.write_text("Spannung (V);Strom (mA)\n" + "\n".join(rows) + "\n", encoding="utf-8")
    upload(page, f)
    page.wait_for_function("() => document.getElementById('intake-report').innerText.includes('strom_messung.csv')")
    report = page.inner_text("#intake-report")
    assert "semicolon" in report and "decimal mark ','" in report and "60 data rows" in report
    wait_for_title(page, FIT, "Strom (mA) against Spannung (V)")
    assert len(trace(page, POINTS, 0)["x"]) + len(trace(page, POINTS, 1)["x"]) == 60
    assert "(V)" in page.evaluate(
        "() => document.querySelector('#fit-chart .js-plotly-plot')._fullLayout.xaxis.title.text"
    )
    shot(page, "03-decimal-comma-upload")


def test_switch_between_holdout_and_k_fold(page):
    page.get_by_text("k-fold cross-validation", exact=True).click()
    wait_for_title(page, ERR, "10-fold cross-validation")
    err = page.evaluate("() => document.querySelector('#error-chart .js-plotly-plot')._fullData[1].error_y.visible")
    assert err is True
    # the boxes follow the mode in their own callback: wait for them rather than race the chart
    page.wait_for_selector("#holdout-box", state="hidden")
    page.wait_for_selector("#folds-box", state="visible")
    assert page.locator("#holdout-box").is_hidden() and page.locator("#folds-box").is_visible()
    shot(page, "04-kfold")
    page.get_by_text("Random holdout", exact=True).click()
    wait_for_title(page, ERR, "random holdout")
    page.wait_for_selector("#holdout", state="visible")
    assert page.locator("#holdout").is_visible()
    page.click("#new-split")
    wait_for_title(page, ERR, "(seed 1)")


def test_overfitting_warning_appears_and_clears(page):
    upload(page, SAMPLES / "cubic_small_noisy.csv")
    wait_for_title(page, FIT, "y (a.u.) against x (a.u.)")
    d0 = degree_now(page)
    assert page.inner_text("#overfit-alert").strip() == ""
    thumb = page.locator("#degree [role=slider]")
    thumb.focus()
    for _ in range(11 - d0):
        page.keyboard.press("ArrowRight")
    wait_degree(page, 11)
    wait_alert(page, True)
    text = page.inner_text("#overfit-alert")
    assert "degree 11" in text and "training error keeps falling" in text
    assert page.locator("#overfit-alert").is_visible()
    shot(page, "05-overfitting-warning")
    for _ in range(11 - d0):
        page.keyboard.press("ArrowLeft")
    wait_degree(page, d0)
    wait_alert(page, False)


def test_png_download_is_a_presentation_sized_png(page, tmp_path):
    with page.expect_download() as dl:
        page.click("#fit-png")
    path = tmp_path / "fit.png"
    dl.value.save_as(path)
    data = path.read_bytes()
    assert png_size(data) == (1600, 900)
    assert len(data) > 20_000  # a drawn chart, not a blank
    (ARTIFACTS / "06-fit-download.png").write_bytes(data)
    with page.expect_download() as dl:
        page.click("#error-svg")
    svg = tmp_path / "err.svg"
    dl.value.save_as(svg)
    text = svg.read_text()
    assert text.startswith("<svg") and "Error by degree" in text and "polynomial degree" in text


def test_a_header_with_markup_renders_as_text(page, tmp_path):
    f = tmp_path / "evil.csv"
    f.write_text("<img src=x onerror=alert(1)>,y\n" + "\n".join(f"{i},{2 * i + (i % 3) * 0.1}" for i in range(1, 30)))
    upload(page, f)
    page.wait_for_function("() => document.getElementById('intake-report').innerText.includes('evil.csv')")
    # the title is drawn from escaped text, so the SVG shows the characters themselves
    page.wait_for_function(
        "() => { const t = document.querySelector('#fit-chart .gtitle');"
        " return !!t && t.textContent.includes('against <img src=x onerror=alert(1)>'); }"
    )
    assert page.evaluate("() => document.querySelectorAll('img[src=\"x\"]').length") == 0
    assert page.dialogs == []
    assert "<img src=x onerror=alert(1)>" in page.inner_text("#x-column")
    # the model card follows: its table, built from the file's numbers, arrives as text too
    page.wait_for_function("() => document.getElementById('coefficients').innerText.includes('x')")
    assert page.inner_text("#equation").startswith("y = ")
    xtitle = page.evaluate("() => document.querySelector('#fit-chart .xtitle').textContent")
    assert xtitle == "<img src=x onerror=alert(1)>"
    shot(page, "07-markup-header")


def test_oversize_upload_shows_a_message(page, tmp_path):
    f = tmp_path / "big.csv"
    f.write_text("x,y\n" + "\n".join(f"{i},{i * 2}" for i in range(12_000)))  # about 130 KiB
    upload(page, f)
    page.wait_for_function("() => document.getElementById('upload-notice').innerText.includes('upload limit')")
    assert "64 KiB" in page.inner_text("#upload-notice")
    assert "temperature" in chart_title(page, FIT)  # the previous data stay on screen
    # far above the limit the upload box drops the file by itself; the page still says why
    huge = tmp_path / "huge.csv"
    huge.write_text("x,y\n" + "1,2\n" * 100_000)  # 400 KB, above the box's own max_size
    upload(page, huge)
    page.wait_for_function("() => document.getElementById('upload-size-warning').innerText.includes('was not sent')")


def test_shared_url_restores_the_view(browser, server):
    ctx = browser.new_context(viewport={"width": 1500, "height": 1300})
    pg = ctx.new_page()
    try:
        pg.goto(server.url + "?x=output+%28mV%29&y=temperature+%28%C2%B0C%29&mode=kfold&k=5&seed=2&degree=6")
        wait_for_title(pg, ERR, "5-fold cross-validation (seed 2)")
        wait_for_title(pg, FIT, "Degree 6 fit")
    finally:
        ctx.close()


def test_refused_folds_and_seed_are_named_in_the_split_note(page):
    # the browser sends out-of-range values on; the note says what was refused and what is in force
    page.get_by_text("k-fold cross-validation", exact=True).click()
    wait_for_title(page, ERR, "10-fold cross-validation")
    page.fill("#folds", "1")
    page.press("#folds", "Enter")
    wait_for_title(page, ERR, "2-fold cross-validation")
    assert "Folds '1' was not used" in page.inner_text("#split-note") and "2 is in force" in page.inner_text(
        "#split-note"
    )
    page.fill("#seed", "-5")
    page.press("#seed", "Enter")
    page.wait_for_function("() => document.getElementById('split-note').innerText.includes(\"Seed '-5' was not used\")")
    assert "0 is in force" in page.inner_text("#split-note")
