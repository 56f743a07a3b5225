"""The data panel in real headless Chromium: a workbook's second sheet, a pasted block with decimal commas,
and a shared URL that names its file, opened by a colleague (a fresh browser context, another session)
and reloaded by its author (the same session, while the server holds the file).

The server runs behind the session guard (``app.server.make_server``), so each browser context has its
own session and sees only its own uploads. The data are invented in the tests. Screenshots go to
tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import re
from urllib.parse import parse_qs, urlsplit

import numpy as np
import pytest
from browser_support import ARTIFACTS, chart_title, trace, wait_for_title

pytestmark = [pytest.mark.browser, pytest.mark.slow]

FIT, ERR, POINTS = "fit-chart", "error-chart", "fit-points"  # POINTS: the fit chart's points layer


@pytest.fixture(scope="module")
def server():
    from app import create_app
    from app.server import make_server

    srv = make_server(create_app(None), host="127.0.0.1", port=0, threads=4).start()
    yield srv
    srv.stop()


def open_page(browser, url: str, width: int = 1440):
    ctx = browser.new_context(viewport={"width": width, "height": 1300})
    pg = ctx.new_page()
    pg.set_default_timeout(25_000)
    pg.goto(url)
    return ctx, pg


def shot(page, name: str) -> None:
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / f"{name}.png"), full_page=True)


def wait_text(page, element_id: str, part: str) -> None:
    page.wait_for_function(
        "([id, t]) => { const el = document.getElementById(id); return !!el && el.innerText.includes(t); }",
        arg=[element_id, part],
    )


def pick(page, dropdown_id: str, option: str) -> None:
    page.click(f"#{dropdown_id}")
    page.get_by_role("option", name=option, exact=True).click()


def degree_now(page) -> int:
    return int(re.match(r"Degree (\d+)", chart_title(page, FIT)).group(1))


def query(page) -> dict:
    return {k: v[0] for k, v in parse_qs(urlsplit(page.url).query).items()}


# ----------------------------------------------------------------------------
# a workbook: the sheet picker reads another sheet


def workbook(path) -> None:
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "read me"
    ws.append(["Invented calibration runs for a test; the numbers are on the other sheets."])
    for title, slope in (("run A", 2.0), ("run B", -3.0)):
        ws = wb.create_sheet(title)
        ws.append(["dose (ug)", f"response {title[-1]}"])
        for v in range(1, 16):
            ws.append([v, 1.0 + slope * v + 0.02 * ((v * 7) % 5 - 2)])
    wb.save(path)


def test_a_workbook_second_sheet_is_fitted(browser, server, tmp_path):
    f = tmp_path / "runs.xlsx"
    workbook(f)
    ctx, pg = open_page(browser, server.url)
    try:
        wait_for_title(pg, FIT, "Degree")
        pg.set_input_files("#upload input[type=file]", str(f))
        wait_text(pg, "intake-report", "Read sheet 'run A' of 'runs.xlsx'")
        assert pg.is_visible("#sheet")
        wait_for_title(pg, FIT, "response A against dose (ug)")
        pick(pg, "sheet", "run B")
        wait_text(pg, "intake-report", "Read sheet 'run B' of 'runs.xlsx'")
        wait_for_title(pg, FIT, "response B against dose (ug)")
        points = trace(pg, POINTS, 0)["y"] + trace(pg, POINTS, 1)["y"]
        assert len(points) == 15 and min(points) < -40  # run B falls with dose
        # the model card follows: its coefficients are those of every row of run B, the model
        # handed over (numpy.polynomial.polyfit on the chart's training and test points as the reference)
        pg.wait_for_function("() => location.search.includes('sheet=run+B')")
        train, test = trace(pg, POINTS, 0), trace(pg, POINTS, 1)
        x = np.asarray(list(train["x"]) + list(test["x"]), dtype=float)
        y = np.asarray(list(train["y"]) + list(test["y"]), dtype=float)
        d = degree_now(pg)
        pg.wait_for_function(  # the slope cell of run B's card is negative
            "() => { const c = document.querySelectorAll('#coefficients td.num');"
            " return c.length > 3 && /^[-−]/.test(c[3].innerText); }"
        )
        cells = pg.locator("#coefficients td.num").all_inner_texts()
        coef = [float(c.replace("−", "-")) for c in cells[::3]]
        ref = np.polynomial.polynomial.polyfit(x, y, d)
        assert np.allclose(coef, ref, rtol=1e-5, atol=1e-6), (coef, ref)
        shot(pg, "data-01-workbook-sheet-b")
    finally:
        ctx.close()


# ----------------------------------------------------------------------------
# a pasted block


def test_a_pasted_block_with_decimal_commas_is_fitted(browser, server):
    rows = [f"{v / 2:.1f}\t{1 + 0.5 * v + 0.01 * (v % 3):.3f}".replace(".", ",") for v in range(1, 25)]
    block = "Spannung (V)\tStrom (mA)\n" + "\n".join(rows)
    ctx, pg = open_page(browser, server.url, width=1024)
    try:
        wait_for_title(pg, FIT, "Degree")
        pg.fill("#paste-text", block)
        pg.click("#paste-button")
        wait_text(pg, "intake-report", "pasted table")
        wait_for_title(pg, FIT, "Strom (mA) against Spannung (V)")
        xs = trace(pg, POINTS, 0)["x"] + trace(pg, POINTS, 1)["x"]
        assert sorted(xs) == [v / 2 for v in range(1, 25)]  # "0,5" read as 0.5
        assert "decimal mark ','" in pg.inner_text("#intake-report")
        shot(pg, "data-02-pasted-1024")
    finally:
        ctx.close()


# ----------------------------------------------------------------------------
# a shared URL names its file


def oven_csv(path) -> None:
    rng = np.random.default_rng(11)
    lines = ["set point (C),straight,bending,batch"]
    for i, v in enumerate(np.linspace(0, 10, 48)):
        s = 2 + 0.5 * v + rng.normal(0, 0.05)
        b = 1 + 0.3 * v - 0.8 * v**2 + 0.09 * v**3 + rng.normal(0, 0.3)
        lines.append(f"{v:.4f},{s:.5f},{b:.5f},{i % 4}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def set_view(pg, csv) -> str:
    """Upload, pick y and group, an ordered holdout and degree 2; the URL once it says so."""
    pg.set_input_files("#upload input[type=file]", str(csv))
    wait_text(pg, "intake-report", "oven.csv")
    wait_for_title(pg, FIT, "straight against set point (C)")
    pick(pg, "y-column", "bending")
    wait_for_title(pg, FIT, "bending against set point (C)")
    pick(pg, "group-column", "batch")
    pg.get_by_text("Ordered holdout (keep back the highest x)", exact=True).click()
    wait_for_title(pg, ERR, "ordered")
    thumb = pg.locator("#degree [role=slider]")
    thumb.focus()
    for _ in range(25):
        if degree_now(pg) == 2:
            break
        pg.keyboard.press("ArrowLeft" if degree_now(pg) > 2 else "ArrowRight")
        pg.wait_for_timeout(150)
    wait_for_title(pg, FIT, "Degree 2 fit")
    pg.get_by_text("95 % prediction band (a new single reading)").click()
    pg.wait_for_function(
        "() => ['file=oven.csv', 'degree=2', 'mode=ordered', 'g=batch', 'bands=confidence%2Cprediction']"
        ".every((p) => location.search.includes(p))"
    )
    return pg.url


def same_view(pg) -> None:
    wait_for_title(pg, FIT, "Degree 2 fit")
    wait_for_title(pg, FIT, "bending against set point (C)")
    wait_for_title(pg, ERR, "ordered")
    assert pg.locator("#bands input[value=prediction]").is_checked()
    assert "batch" in pg.inner_text("#group-column")


def test_a_shared_url_restores_the_view_for_a_colleague_and_on_reload(browser, server, tmp_path):
    csv = tmp_path / "oven.csv"
    oven_csv(csv)
    ctx_a, a = open_page(browser, server.url)
    ctx_b = None
    try:
        wait_for_title(a, FIT, "Degree")
        shared = set_view(a, csv)
        # the bands are put into the address in place: the back button still goes back
        a.wait_for_timeout(800)
        a.go_back()
        a.wait_for_timeout(1500)
        assert a.url != shared
        # a colleague: a fresh browser context (its own session), the file not loaded there
        ctx_b, b = open_page(browser, shared, width=1024)
        wait_text(b, "view-notice", "load 'oven.csv' to restore this view")
        wait_for_title(b, FIT, "temperature")  # the start-up file meanwhile
        b.wait_for_timeout(1500)  # the model card writes its URL; the pending view's URL is put back
        b.wait_for_function("() => location.search.includes('mode=ordered')")
        assert query(b)["mode"] == "ordered" and query(b)["file"] == "oven.csv"
        shot(b, "data-03-colleague-asked-for-the-file-1024")
        b.set_input_files("#upload input[type=file]", str(csv))
        same_view(b)
        wait_text(b, "view-notice", "Restored the shared view of 'oven.csv'")
        assert degree_now(b) == 2
        shot(b, "data-04-colleague-restored")
        # the author reloads: the server still holds the file for this session
        a.goto(shared)
        same_view(a)
        assert "load 'oven.csv'" not in a.inner_text("#view-notice")
        assert degree_now(a) == 2
        shot(a, "data-05-reloaded-1440")
    finally:
        ctx_a.close()
        if ctx_b is not None:
            ctx_b.close()


# ----------------------------------------------------------------------------
# the degree follows the columns


def set_degree(pg, d: int) -> None:
    pg.locator("#degree [role=slider]").focus()
    for _ in range(25):
        if degree_now(pg) == d:
            return
        pg.keyboard.press("ArrowLeft" if degree_now(pg) > d else "ArrowRight")
        pg.wait_for_timeout(150)
    wait_for_title(pg, FIT, f"Degree {d} fit")


def test_the_degree_follows_new_columns_and_stays_for_a_new_split(browser, server, tmp_path):
    csv = tmp_path / "oven.csv"
    oven_csv(csv)
    ctx, pg = open_page(browser, server.url, width=1024)
    try:
        wait_for_title(pg, FIT, "Degree")
        pg.set_input_files("#upload input[type=file]", str(csv))
        wait_for_title(pg, FIT, "straight against set point (C)")
        set_degree(pg, 5)  # by hand
        pg.get_by_text("k-fold cross-validation", exact=True).click()
        wait_for_title(pg, ERR, "10-fold")
        pg.wait_for_timeout(1000)
        assert degree_now(pg) == 5  # same columns: the hand-set degree stays
        pick(pg, "y-column", "bending")
        wait_for_title(pg, FIT, "bending against set point (C)")
        rec = int(re.search(r"\d+", pg.inner_text("#recommended-degree")).group())
        wait_for_title(pg, FIT, f"Degree {rec} fit")
        pg.wait_for_function("(d) => location.search.includes('degree=' + d)", arg=rec)
        # the model card follows: as many coefficient rows as the recommended degree needs
        pg.wait_for_function("(n) => document.querySelectorAll('#coefficients tbody tr').length === n", arg=rec + 1)
        assert rec != 5
        shot(pg, "data-06-degree-follows-columns-1024")
    finally:
        ctx.close()


# ----------------------------------------------------------------------------
# the page's weighting, picked under the weights column


def wait_caption(pg, part: str) -> None:
    pg.wait_for_function(
        """(t) => { const gd = document.querySelector('#fit-chart .js-plotly-plot');
            const notes = (gd && gd._fullLayout && gd._fullLayout.annotations) || [];
            return notes.some((a) => (a.text || '').includes(t)); }""",
        arg=part,
        timeout=40_000,
    )


def test_the_weighting_picked_under_the_weights_column_reaches_the_page_and_the_address(browser, server, tmp_path):
    """The invented oven file: its first set point is 0 (line 2), where 1/x is undefined; 1/y² is defined."""
    csv = tmp_path / "oven.csv"
    oven_csv(csv)
    ctx, pg = open_page(browser, server.url)
    try:
        wait_for_title(pg, FIT, "Degree")
        pg.set_input_files("#upload input[type=file]", str(csv))
        wait_for_title(pg, FIT, "straight against set point (C)")
        pick(pg, "weighting", "1/x: variance grows with x")
        wait_text(pg, "fit-notice", "undefined where x = 0: 1 line (line 2)")
        pick(pg, "weighting", "1/y²: spread grows with the response (constant relative error)")
        wait_caption(pg, "weighting 1/y²")
        wait_caption(pg, "weighted test RMSE")
        assert pg.inner_text("#fit-notice").strip() == ""
        wait_text(pg, "model-note", "the rule 1/y2 gives there")
        pg.wait_for_function("() => location.search.includes('wt=1%2Fy2')")
        shot(pg, "data-07-weighting-1-over-y2")
        pg.goto(pg.url)  # reload: the same session still holds the file
        wait_for_title(pg, FIT, "straight against set point (C)")
        wait_caption(pg, "weighting 1/y²")
        assert "1/y²" in pg.inner_text("#weighting")
    finally:
        ctx.close()
