"""The calibration panels as plain functions: readings read back, standards read back, weightings compared.

References, named beside each check:
* NIST StRD "Pontius" (tests/data/nist_strd/Pontius.dat; the load-cell data of the NIST/SEMATECH
  e-Handbook's calibration case study): x0 by brentq on statsmodels' OLS quadratic, the calibration
  interval of e-Handbook section 4.5.2.1 and u(x0) by the delta method (EURACHEM/CITAC guide, E.3;
  remembered formula) with statsmodels' covariance.
* statsmodels WLS for the named weightings; scipy's brentq for every root.
* Invented data (a hump, an assay with a blank) for the sentences and the acceptance counts.
"""

from __future__ import annotations

import math
from dataclasses import replace

import nist
import numpy as np
import pytest
import statsmodels.api as sm
from dash import html
from scipy import stats
from scipy.optimize import brentq

from app import edge, ids, text
from app import views_calibration as cal
from app.panels import PANELS, predict, readback, standards
from app.panels.settings import split_key
from fitting import FitError

SCALE = 1e6  # the reference works in load / 1e6 so that statsmodels' design is well conditioned


def page_text(component) -> str:
    """Every string in a Dash component tree, joined."""
    if isinstance(component, (list, tuple)):
        return " ".join(page_text(c) for c in component)
    if isinstance(component, str | int | float):
        return str(component)
    if component is None:
        return ""
    return page_text(getattr(component, "children", None))


def csv_bytes(header: str, x, y) -> bytes:
    return (header + "\n" + "\n".join(f"{float(a)!r},{float(b)!r}" for a, b in zip(x, y, strict=True)) + "\n").encode()


def key_for(service, data: bytes, name: str, **kw) -> dict:
    info = service.load_bytes(data, name)
    store = info.to_store()
    args = dict(weights=None, group=None, mode="holdout", holdout=25, folds=10, seed=0)
    args.update(kw)
    return split_key(store, store["x"], store["y"], **args)


class Reference:
    """x0, interval ends and u(x0) from a statsmodels OLS/WLS result (rising curve; e-Handbook 4.5.2.1)."""

    def __init__(self, res, weight=lambda u: 1.0):
        self.b, self.cov, self.s2, self.df = (
            np.asarray(res.params),
            np.asarray(res.cov_params()),
            res.scale,
            res.df_resid,
        )
        self.weight = weight

    def f(self, u):
        return float(np.polynomial.polynomial.polyval(u, self.b))

    def sp(self, u, k):
        g = u ** np.arange(self.b.size)
        return math.sqrt(self.s2 / (k * self.weight(u)) + float(g @ self.cov @ g))

    def read(self, y0, k, lo, hi, level=0.95):
        t = stats.t.ppf(0.5 + level / 2, self.df)
        x0 = brentq(lambda u: self.f(u) - y0, lo, hi, xtol=1e-15)
        xl = brentq(lambda u: self.f(u) + t * self.sp(u, k) - y0, lo, x0, xtol=1e-15)
        xu = brentq(lambda u: self.f(u) - t * self.sp(u, k) - y0, x0, hi, xtol=1e-15)
        slope = float(np.polynomial.polynomial.polyval(x0, np.polynomial.polynomial.polyder(self.b)))
        return x0, xl, xu, self.sp(x0, k) / abs(slope)


@pytest.fixture()
def pontius(fit_service):
    d = nist.load("Pontius")
    key = key_for(fit_service, csv_bytes("load,deflection", d.x, d.y), "pontius.csv")
    return fit_service, key, d


def marks_of(marks: dict, suffix: str) -> list[dict]:
    return [s for s in marks["shapes"] if s["name"].endswith(suffix)]


# ----------------------------------------------------------------------------
# read-back


@pytest.mark.parametrize(("k", "level"), [(1, 95), (3, 90)])
def test_pontius_read_back_uses_every_row_and_matches_statsmodels(pontius, k, level):
    """NIST StRD Pontius, quadratic, holdout split on the charts: the read-back fit uses all 40 rows.

    x0 (brentq on statsmodels OLS), the interval ends (e-Handbook 4.5.2.1) and u(x0) (delta method
    with statsmodels' covariance), read from the chart's marks and the table.
    """
    service, key, d = pontius
    out = readback.on_readback(service, "0.9; 1.45", k, level, key, 2)
    u = d.x / SCALE
    ref = Reference(sm.OLS(d.y, np.vander(u, 3, increasing=True)).fit())  # all 40 rows
    table = page_text(out["result"])
    assert f"{level:g} % calibration interval" in table
    assert "every one of the 40 usable rows" in out["note"]
    for i, y0 in enumerate((0.9, 1.45)):
        x0, xl, xu, ux = (v * SCALE for v in ref.read(y0, k, u.min(), u.max(), level / 100))
        half = (xu - xl) / 2
        (line,) = [s for s in marks_of(out["marks"], "-x") if s["name"].startswith(f"{cal.READINGS_OWNER}-{i}-")]
        (band,) = [s for s in marks_of(out["marks"], "-interval") if s["name"].startswith(f"{cal.READINGS_OWNER}-{i}-")]
        assert line["x0"] == pytest.approx(x0, rel=1e-6)  # statsmodels OLS + brentq
        assert abs(band["x0"] - xl) <= 1e-3 * half and abs(band["x1"] - xu) <= 1e-3 * half  # e-Handbook 4.5.2.1
        (yline,) = [s for s in marks_of(out["marks"], "-y") if s["name"].startswith(f"{cal.READINGS_OWNER}-{i}-")]
        assert yline["y0"] == yline["y1"] == y0 and yline["xref"] == "paper"
        assert f"{x0:.8g}" in table or f"{x0:.8g}"[:-1] in table
        assert f"{ux:.4g}" in table  # u(x0), delta method with statsmodels' covariance


def test_the_degree_on_screen_is_the_degree_read_through(pontius):
    """Degree 1 and degree 2 read the same reading to different x0, each statsmodels' own (brentq)."""
    service, key, d = pontius
    u = d.x / SCALE
    for degree in (1, 2):
        out = readback.on_readback(service, "1.2", 1, 95, key, degree)
        ref = Reference(sm.OLS(d.y, np.vander(u, degree + 1, increasing=True)).fit())
        x0 = ref.read(1.2, 1, u.min(), u.max())[0] * SCALE
        (line,) = marks_of(out["marks"], "-x")
        assert line["x0"] == pytest.approx(x0, rel=1e-6)
        assert f"degree {degree} fit" in out["note"]
        assert out["marks"]["stamp"][-2] == degree


def test_named_weighting_reaches_the_read_back(pontius):
    """Weighting 1/x² (the page's weighting, in the settings record): x0 and u(x0) against statsmodels WLS
    with w = 1/x², and the variance of the reading at x0 taken as s²/(k·w(x0)) (CALIBRATION.md section 4)."""
    service, key, d = pontius
    u = d.x / SCALE
    out = readback.on_readback(service, "1.45", 2, 95, dict(key, weighting="1/x2"), 2)
    res = sm.WLS(d.y, np.vander(u, 3, increasing=True), weights=1.0 / u**2).fit()
    ref = Reference(res, weight=lambda v: 1.0 / v**2)
    x0, xl, xu, ux = (v * SCALE for v in ref.read(1.45, 2, u.min(), u.max()))
    (line,) = marks_of(out["marks"], "-x")
    (band,) = marks_of(out["marks"], "-interval")
    assert line["x0"] == pytest.approx(x0, rel=1e-6)
    half = (xu - xl) / 2
    assert abs(band["x0"] - xl) <= 1e-3 * half and abs(band["x1"] - xu) <= 1e-3 * half
    assert f"{ux:.4g}" in page_text(out["result"])
    assert "1/x²" in out["note"]


def test_decimal_comma_readings_follow_the_file(fit_service):
    """A decimal-comma file: "0,9; 1,45" are two readings, and a stray comma pair is refused in words."""
    assert cal.parse_readings("0,9; 1,45\n2", decimal=",").tolist() == [0.9, 1.45, 2.0]
    assert cal.parse_readings("0.9, 1.45 2", decimal=".").tolist() == [0.9, 1.45, 2.0]
    with pytest.raises(FitError, match="'0,9,1' is not a number; type readings like 12,5; 40"):
        cal.parse_readings("0,9,1", decimal=",")
    with pytest.raises(FitError, match="'inf' is not a finite number"):
        cal.parse_readings("1, inf")


def test_length_is_checked_before_the_text_is_split(monkeypatch):
    """A text over the character limit is refused by its length alone; too many values by their count."""
    calls = []
    monkeypatch.setattr(cal.re, "split", lambda *a, **k: calls.append(a) or [])
    with pytest.raises(FitError, match="characters"):
        cal.parse_readings("1 " * (cal.MAX_READING_CHARS // 2 + 1))
    assert calls == []  # never split
    monkeypatch.undo()
    with pytest.raises(FitError, match=f"at most {cal.MAX_READINGS} readings"):
        cal.parse_readings(" ".join(["1"] * (cal.MAX_READINGS + 1)))


@pytest.mark.parametrize(
    ("count", "level", "message"),
    [(0, 95, "whole number from 1 to 1000"), (2.5, 95, "not '2.5'"), (1, 100, "from 50 to 99.9"), (1, 20, "'20'")],
)
def test_out_of_range_k_and_level_are_said_in_the_panel(pontius, count, level, message):
    service, key, _ = pontius
    with pytest.raises(FitError, match=message):
        readback.on_readback(service, "1.2", count, level, key, 2)
    out = readback._on_error(FitError(text.bad_count(count)))
    assert isinstance(out["result"], html.P) and "error" in out["result"].className
    assert out["marks"]["shapes"] == []  # the chart loses this panel's marks
    assert out["note"] is not None


def test_every_warning_in_words_for_a_curve_that_turns(fit_service):
    """Invented hump (vertex at −b1/(2 b2) of statsmodels' quadratic): several roots, no root, the turn."""
    x = np.repeat(np.arange(0.0, 11.0), 2)
    y = 40.0 - (x - 6.0) ** 2 + np.tile([0.3, -0.3], 11) + 0.05 * x
    key = key_for(fit_service, csv_bytes("dose,signal", x, y), "hump.csv", mode="kfold")
    out = readback.on_readback(fit_service, "30; 80; 4.5", 1, 95, key, 2)
    words = page_text(out["result"])
    b = sm.OLS(y, np.vander(x, 3, increasing=True)).fit().params
    vertex = -b[1] / (2 * b[2])
    assert "matches 2 values of x" in words
    assert "lies outside the responses the standards cover" in words
    assert "not monotonic" in words and f"x = {vertex:.6g}" in words
    assert "not bounded inside the calibrated range" in words  # 4.5 reads back next to x = 0: an open lower end
    assert len(marks_of(out["marks"], "-interval")) == 1  # only the reading with one root gets an interval


def test_no_readings_no_marks_and_a_prompt(pontius):
    service, key, _ = pontius
    out = readback.on_readback(service, "  ", 1, 95, key, 2)
    assert out["marks"]["shapes"] == [] and text.READBACK_EMPTY in page_text(out["result"])
    out = readback.on_readback(service, "1", 1, 95, None, None)
    assert out["marks"]["shapes"] == []


# ----------------------------------------------------------------------------
# weighting by formula


ASSAY_X = [0.0, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0]
ASSAY_Y = [0.02, 0.11, 0.2, 0.52, 1.01, 1.98, 5.05, 9.9, 0.09, 0.23, 0.49, 0.98, 2.04, 4.95, 10.08]


def test_undefined_weighting_is_refused_with_its_file_lines(fit_service):
    """1/x and 1/x² are undefined at the blank (x = 0): the message names its line in the file (line 2)."""
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, ASSAY_Y), "assay.csv", mode="kfold")
    with pytest.raises(FitError, match=r"undefined where x = 0: 1 line \(line 2\)"):
        standards.on_standards(fit_service, 15, 20, dict(key, weighting="1/x2"), 1)
    with pytest.raises(FitError, match=r"undefined where x = 0: 1 line \(line 2\)"):
        readback.on_readback(fit_service, "1", 1, 95, dict(key, weighting="1/x"), 1)
    with pytest.raises(FitError, match="Unknown weighting"):
        cal.check_weighting_choice("1/z")


def test_weights_column_and_a_named_rule_are_not_both_used(fit_service):
    data = b"conc,area,w\n" + b"".join(f"{a},{b},1\n".encode() for a, b in zip(ASSAY_X, ASSAY_Y, strict=True))
    key = key_for(fit_service, data, "w.csv", mode="kfold", weights="w")
    with pytest.raises(FitError, match="weights column 'w' is chosen"):
        standards.on_standards(fit_service, 15, 20, dict(key, weighting="1/y"), 1)
    out = standards.on_standards(fit_service, 15, 20, key, 1)
    assert "weights column" in out["note"].children and "'w' is not part of it" in page_text(out["comparison"])


# ----------------------------------------------------------------------------
# standards read back


def statsmodels_back(x, y, degree, weights=None):
    """x back per standard by brentq on statsmodels' fit over the widened range, and its error %."""
    design = np.vander(np.asarray(x), degree + 1, increasing=True)
    res = (sm.WLS(y, design, weights=weights) if weights is not None else sm.OLS(y, design)).fit()
    b = res.params
    lo, hi = min(x), max(x)
    a, c = lo - 0.2 * abs(lo), hi + 0.2 * abs(hi)
    out = []
    for xi, yi in zip(x, y, strict=True):
        xb = brentq(lambda u, yi=yi: np.polynomial.polynomial.polyval(u, b) - yi, a, c, xtol=1e-14)
        out.append((xb, (xb - xi) / xi * 100 if xi else float("nan")))
    return out


def test_standards_table_against_statsmodels_and_the_acceptance_counts(fit_service):
    """Invented assay, linear: x back and error % per standard (statsmodels OLS + brentq); pass/fail at
    ±15 % and ±20 % at the lowest level (FDA 2018 / ICH M10 defaults); the blank is not judged."""
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, ASSAY_Y), "assay.csv", mode="kfold")
    out = standards.on_standards(fit_service, None, None, key, 1)
    rows = out["table"].children[1].children
    ref = statsmodels_back(ASSAY_X, ASSAY_Y, 1)
    passing = 0
    for row, (xi, (xb, re)) in zip(rows, zip(ASSAY_X, ref, strict=True), strict=True):
        cells = [page_text(c) for c in row.children]
        assert float(cells[3]) == pytest.approx(xb, rel=1e-5)
        if xi == 0:
            assert cells[5] == text.NOT_JUDGED and "Blank" in cells[6]
            continue
        assert float(cells[4]) == pytest.approx(re, rel=1e-2, abs=1e-3)
        ok = abs(re) <= (20 if xi == 1.0 else 15)
        passing += ok
        assert cells[5] == (text.PASS if ok else text.FAIL)
    assert out["summary"].startswith(f"{passing} of 14 standards pass")
    assert ("Both minimums are met." in out["summary"]) == (passing / 14 >= 0.75)
    failing = [r for r in rows if page_text(r.children[5]) == text.FAIL]
    trace = out["marks"]["traces"]
    assert len(failing) == len(trace[0]["x"]) if trace else not failing
    assert "FDA 2018" in text.STANDARDS_SOURCE and "ICH M10" in text.STANDARDS_SOURCE


def test_a_tighter_tolerance_fails_more_and_marks_them(fit_service):
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, ASSAY_Y), "assay.csv", mode="kfold")
    loose = standards.on_standards(fit_service, 15, 20, key, 1)
    tight = standards.on_standards(fit_service, 1, 1, key, 1)
    n_loose = len(loose["marks"]["traces"][0]["x"]) if loose["marks"]["traces"] else 0
    (trace,) = tight["marks"]["traces"]
    ref = statsmodels_back(ASSAY_X, ASSAY_Y, 1)
    expect = sorted(xi for xi, (_, re) in zip(ASSAY_X, ref, strict=True) if xi and abs(re) > 1)
    assert sorted(trace["x"]) == expect and len(expect) > n_loose
    assert trace["meta"] == {"owner": cal.STANDARDS_OWNER} and trace["name"] == text.FAILING_MARK_NAME


@pytest.mark.parametrize("bad", [0, -5, 150])
def test_tolerance_out_of_range_is_said(fit_service, bad):
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, ASSAY_Y), "assay.csv", mode="kfold")
    with pytest.raises(FitError, match="above 0 and at most 100"):
        standards.on_standards(fit_service, bad, 20, key, 1)
    out = standards._on_error(FitError("x"))
    assert out["table"] == [] and out["marks"]["traces"] == []


def test_weighting_comparison_ranks_as_statsmodels_wls_does(fit_service):
    """Σ|error %| per rule (Almeida et al. 2002) recomputed with statsmodels WLS + brentq; the same ranking.

    The assay has no blank here, so every rule is defined."""
    x, y = ASSAY_X[1:], ASSAY_Y[1:]
    key = key_for(fit_service, csv_bytes("conc,area", x, y), "assay.csv", mode="kfold")
    out = standards.on_standards(fit_service, 15, 20, key, 1)
    xa, ya = np.asarray(x), np.asarray(y)
    weights = {"none": None, "1/x": 1 / xa, "1/x2": 1 / xa**2, "1/y": 1 / ya, "1/y2": 1 / ya**2}
    sums = {r: sum(abs(re) for _, re in statsmodels_back(x, y, 1, w)) for r, w in weights.items()}
    rows = out["comparison"][0].children[1].children
    shown = {}
    for row in rows:
        cells = [page_text(c) for c in row.children]
        rule = next(r for r, label in cal.fitting.WEIGHTINGS.items() if cells[1].startswith(label))
        shown[rule] = (int(cells[0]), float(cells[2]))
        assert float(cells[2]) == pytest.approx(sums[rule], rel=1e-3)
    ranking = sorted(sums, key=sums.get)
    assert [r for r, _ in sorted(shown.items(), key=lambda kv: kv[1][0])] == ranking
    assert "(in use)" in page_text(rows[0])


# ----------------------------------------------------------------------------
# the page


def test_panels_sit_where_the_page_expects_them():
    order = list(PANELS)
    assert order[order.index(predict) + 1] is readback
    assert readback.SLOT == predict.SLOT and standards in order


def test_edge_types_the_new_inputs():
    """Typed values reach the panel (which explains a bad number); a wrong JSON type is refused at the edge."""
    body = {"inputs": [{"id": ids.READBACK_COUNT, "property": "value", "value": 2.5}]}
    assert edge.check_callback_body(body) is None
    body["inputs"][0]["value"] = "two"
    assert "readback-count.value" in edge.check_callback_body(body)
    body = {"inputs": [{"id": ids.WEIGHTING, "property": "value", "value": ["1/x"]}]}
    assert "weighting.value" in edge.check_callback_body(body)


def test_a_skipped_weighting_names_the_file_lines(fit_service):
    """The blank (x = 0, line 2 of the file) makes 1/x and 1/x² undefined: the comparison says so by line."""
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, ASSAY_Y), "assay.csv", mode="kfold")
    out = standards.on_standards(fit_service, 15, 20, key, 1)
    words = page_text(out["comparison"])
    assert words.count("1 line (line 2)") == 2 and "row 0" not in words


# ----------------------------------------------------------------------------
# the HTML report


def test_report_sections_carry_what_the_page_shows(pontius):
    """The report gets the same read-back and back-calculation the panels show (same fit, same numbers)."""
    service, key, d = pontius
    got = cal.report_sections(service, key, 2, readings="0.9; abc", count=3, level=90)
    assert set(got) == {"back_calculation"}  # "abc" is refused: no read-back section
    got = cal.report_sections(service, key, 2, readings="0.9; 1.45", count=3, level=90)
    page = readback.on_readback(service, "0.9; 1.45", 3, 90, key, 2)
    rb = got["read_back"]
    assert rb.level == 0.9 and rb.readings == 3
    (band0,) = [s for s in marks_of(page["marks"], "-interval") if "-0-" in s["name"]]
    assert (rb.rows[0].x_lower, rb.rows[0].x_upper) == (band0["x0"], band0["x1"])
    assert len(got["back_calculation"].rows) == 40
    assert cal.report_sections(service, None, 2) == {}
    assert "back_calculation" not in cal.report_sections(service, key, 2, tolerance=0)


def test_too_many_rows_for_standards_is_said(fit_service):
    """Reading every row back is refused above MAX_STANDARDS rows, in words, before any work."""
    n = cal.MAX_STANDARDS + 1
    x = np.linspace(1.0, 100.0, n)
    key = key_for(fit_service, csv_bytes("conc,area", x, 2 + 0.5 * x), "big.csv", mode="kfold")
    with pytest.raises(FitError, match=f"{n:,} rows, {cal.MAX_STANDARDS:,} at most"):
        standards.on_standards(fit_service, 15, 20, key, 1)
    out = readback.on_readback(fit_service, "30", 1, 95, key, 1)  # reading back unknowns still works
    (line,) = marks_of(out["marks"], "-x")
    assert line["x0"] == pytest.approx((30 - 2) / 0.5, rel=1e-9)  # exact line y = 2 + 0.5 x


def test_a_blank_that_does_not_read_back_still_says_it_is_a_blank(fit_service):
    """Invented assay whose blank response lies below the curve: the row says blank, not judged."""
    y = list(ASSAY_Y)
    y[0] = -5.0  # far below the line's intercept (statsmodels OLS intercept is about 0)
    key = key_for(fit_service, csv_bytes("conc,area", ASSAY_X, y), "assay.csv", mode="kfold")
    out = standards.on_standards(fit_service, 15, 20, key, 1)
    first = [page_text(c) for c in out["table"].children[1].children[0].children]
    assert first[5] == text.NOT_JUDGED and first[6].startswith("Blank (x = 0): not judged.")


def test_the_level_box_is_the_page_level_and_follows_the_address():
    """A valid level typed becomes the page's level (ids.INTERVAL_LEVEL); the address's level fills the box."""
    assert readback.on_level_box(90, 95) == {"level": 90.0}
    assert readback.on_level_box(95, 95)["level"] is readback.no_update
    assert readback.on_level_box(120, 95)["level"] is readback.no_update  # refused: the read-back says why
    assert readback.on_level_box(None, 90) == {"level": 95.0}  # an emptied box means the default
    assert readback.on_level_page(99, 95) == {"box": 99}
    assert readback.on_level_page(95, 95)["box"] is readback.no_update
    assert readback.on_level_page(None, 95)["box"] is readback.no_update


def test_without_a_named_weighting_the_hand_over_model_is_read_through(pontius):
    """The read-back reads through the very fit the model card and the downloads hand over."""
    from app import views_model
    from app.panels.settings import from_key

    service, key, _ = pontius
    ds, cols, split = from_key(key)
    model = cal.calibration_fit(service, ds, cols, split, 2)
    assert model.fit is views_model.handover_fit(service, ds, cols, 2)
    weighted = replace(cols, weighting="1/x")
    by_rule = cal.calibration_fit(service, ds, weighted, split, 2)
    assert by_rule.fit is views_model.handover_fit(service, ds, weighted, 2) and by_rule.fit is not model.fit
    assert by_rule.weighting == by_rule.fit.weighting == "1/x"


def test_the_html_report_carries_the_read_back_and_the_standards(pontius):
    """The report button's file holds the readings read back and the standards table the panels show."""
    from app.panels import downloads

    service, key, d = pontius
    calibration = dict(readings="0.9; 1.45", count=3, level=90, tolerance=15, lowest_tolerance=20)
    page = downloads.on_export(service, "report", key, 2, ["confidence"], "", calibration)["download"]["content"]
    assert "Read-back of unknowns" in page and "90 % calibration interval" in page
    assert "Back-calculated standards" in page
    rb = readback.on_readback(service, "0.9; 1.45", 3, 90, key, 2)
    (line,) = [s for s in marks_of(rb["marks"], "-x") if "-0-" in s["name"]]
    assert f"{line['x0']:.8g}" in page  # the same x0 as on the page (8 significant digits)
    plain = downloads.on_export(service, "report", key, 2, ["confidence"], "")["download"]["content"]
    assert "Read-back of unknowns" not in plain  # nothing typed, no section


def test_rows_left_out_by_the_analyst_are_left_out_of_the_read_back(pontius):
    """A file line left out (the evidence panel's exclusions, carried by the settings record) is not fitted:
    x0 equals statsmodels' on the other 39 rows (brentq)."""
    service, key, d = pontius
    key = dict(key, excluded=[12])  # line 12 of the file: header on line 1, so the 11th pair
    keep = np.arange(d.x.size) != 10
    u = d.x[keep] / SCALE
    ref = Reference(sm.OLS(d.y[keep], np.vander(u, 3, increasing=True)).fit())
    out = readback.on_readback(service, "1.2", 1, 95, key, 2)
    (line,) = marks_of(out["marks"], "-x")
    assert line["x0"] == pytest.approx(ref.read(1.2, 1, u.min(), u.max())[0] * SCALE, rel=1e-6)
    assert "39 usable rows" in out["note"] and out["marks"]["stamp"][7] == [12]
