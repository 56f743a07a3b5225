"""Exports: CSV neutralising (OWASP CSV injection guidance), model JSON round trip, HTML report."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import numpy as np
import pytest

from app import exports, figures
from app.service import SplitSettings
from fitting import PolynomialFit

KFOLD = SplitSettings(mode="kfold")
SENSOR = Path(__file__).resolve().parent.parent / "sample_data" / "sensor_calibration.csv"


@pytest.mark.parametrize("cell", ["=1+1", "+41", "-3", "@SUM(A1)", "\tx", "\rx", '=HYPERLINK("http://x")'])
def test_formula_starts_get_a_single_quote(cell):
    # OWASP "CSV Injection": prefix cells beginning with = + - @ tab or CR with a single quote
    assert exports.neutralise_cell(cell) == "'" + cell


@pytest.mark.parametrize(
    "cell,text", [("abc", "abc"), ("1.5", "1.5"), (2.5, "2.5"), (-2.5, "-2.5"), (-3, "-3"), (None, ""), (True, "yes")]
)
def test_other_cells_are_left_alone(cell, text):
    assert exports.neutralise_cell(cell) == text


def test_predictions_csv_neutralises_names_from_the_file(sensor):
    service, info, cols = sensor
    p = service.predict(info.id, cols, KFOLD, 2, np.array([600.0, 5000.0]))
    text = exports.predictions_csv(p, x_name="=cmd|' /C calc'!A0", y_name="@y")
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[0][0].startswith("'=") and rows[0][1].startswith("'@")
    assert len(rows) == 3
    assert float(rows[1][0]) == 600.0 and rows[1][-1] == "no" and rows[2][-1] == "yes"
    assert float(rows[1][1]) == pytest.approx(p.y[0])


def test_model_json_round_trips_through_the_engine(sensor):
    service, info, cols = sensor
    model = service.model_view(info.id, cols, KFOLD, 3)
    text = exports.model_json(model.fit)
    back = PolynomialFit.from_dict(json.loads(text))
    xs = np.linspace(400, 1800, 9)
    np.testing.assert_allclose(back.predict(xs), model.fit.predict(xs), rtol=1e-12)
    np.testing.assert_allclose(back.band(xs, "prediction")[1], model.fit.band(xs, "prediction")[1], rtol=1e-12)
    assert back.x_name == "output (mV)" and back.domain == model.fit.domain


def test_html_report_is_self_contained_and_complete(sensor):
    service, info, cols = sensor
    split = SplitSettings()
    view = service.split_view(info.id, cols, split)
    dv = service.degree_view(info.id, cols, split, 3)
    model = service.model_view(info.id, cols, split, 3)
    page = exports.html_report(info, view, dv, model, figures.fit_figure(view, dv), figures.error_figure(view, dv))
    assert page.count("<script") >= 2 and "<script src=" not in page  # plotly.js inlined, nothing fetched
    assert len(page) > 1_000_000
    for needle in (
        "Recommended degree: <strong>3</strong>",
        "x^3",
        "95 % CI lower",
        "Header on line 7",
        "25% random holdout (seed 0)",
        "adjusted R²",
        exports.CAUTION_TEXT[:40],
    ):
        assert needle in page, needle
    assert f"{model.coefficient_rows[1]['coefficient']:.10g}" in page


def test_html_report_escapes_text_from_the_file(fit_service):
    text = "<img src=x onerror=alert(1)>,y\n1,2\n2,4.1\n3,6.2\n4,7.9\n5,10.1\n6,12.2\n"
    info = fit_service.load_bytes(text.encode(), "<script>x</script>.csv")
    from app.service import Columns

    cols = Columns(info.default_x, info.default_y)
    split = SplitSettings(mode="kfold", folds=3)
    view = fit_service.split_view(info.id, cols, split)
    dv = fit_service.degree_view(info.id, cols, split, 1)
    model = fit_service.model_view(info.id, cols, split, 1)
    page = exports.html_report(info, view, dv, model, figures.fit_figure(view, dv), figures.error_figure(view, dv))
    assert "<img src=x" not in page and "<script>x</script>" not in page
    assert "&lt;img src=x onerror=alert(1)&gt;" in page


def test_html_report_names_the_constant_term_as_the_command_line_does(sensor):
    from app.handover import term_name

    service, info, cols = sensor
    split = SplitSettings()
    view = service.split_view(info.id, cols, split)
    dv = service.degree_view(info.id, cols, split, 2)
    model = service.model_view(info.id, cols, split, 2)
    page = exports.html_report(info, view, dv, model, figures.fit_figure(view, dv), figures.error_figure(view, dv))
    assert f"<td>{term_name(0)}</td>" in page and term_name(0) == "constant"
    assert "<td>1</td><td>" not in page  # the old name of the constant term


def test_model_json_takes_the_same_provenance_as_the_command_line(sensor):
    from app import handover

    service, info, cols = sensor
    model = service.model_view(info.id, cols, KFOLD, 2)
    prov = handover.provenance(file_name=info.name, sha256=None, x=cols.x, y=cols.y, rows_used=model.fit.n)
    doc = json.loads(exports.model_json(model.fit, prov))
    assert doc["fitted_from"] == prov
    assert exports.model_json(model.fit, prov) == handover.model_json(model.fit, prov)


def _report(service, info, cols, degree=3, **sections):
    split = SplitSettings()
    view = service.split_view(info.id, cols, split)
    dv = service.degree_view(info.id, cols, split, degree)
    model = service.model_view(info.id, cols, split, degree)
    page = exports.html_report(
        info, view, dv, model, figures.fit_figure(view, dv), figures.error_figure(view, dv), **sections
    )
    return page, model


def test_html_report_leaves_the_calibration_sections_out_unless_given(sensor):
    page, _ = _report(*sensor)
    for title in ("Read-back of unknowns", "Back-calculated standards", "Rows left out"):
        assert title not in page


def test_html_report_shows_read_back_back_calculation_and_left_out_rows(sensor):
    """The sections show the engine's own results (fitting.read_back, back_calculate), numbers through _format."""
    import fitting
    from app._format import fmt_number

    service, info, cols = sensor
    _, model = _report(service, info, cols)
    table = fitting.read_table(SENSOR)
    sel = table.select(cols.x, cols.y)
    rb = fitting.read_back(model.fit, [20.0, 500.0], readings=2)
    back = fitting.back_calculate(model.fit, sel.x, sel.y, lines=sel.line_numbers)
    left = {"on purpose: <bad> vial": {"count": 2, "lines": [9, 14]}}
    page, _ = _report(service, info, cols, read_back=rb, back_calculation=back.to_dict(), left_out=left)
    assert "Read-back of unknowns" in page and "4.5.2.1" in page
    assert f"<td>{fmt_number(rb.rows[0].x, 8)}</td>" in page and f"<td>{fmt_number(rb.rows[0].u_x, 4)}</td>" in page
    assert "lies outside the responses" in page  # 500 °C is beyond the standards
    assert "Back-calculated standards" in page and "FDA 2018 / ICH M10" in page
    first = back.rows[0]
    assert f"<td>{first.line}</td><td>{fmt_number(first.x, 8)}</td>" in page
    s = back.summary
    assert f"{s.standards_passing} of {s.standards} standards pass" in page
    assert "Rows left out" in page and "<td>9, 14</td>" in page
    assert "on purpose: &lt;bad&gt; vial" in page and "<bad>" not in page  # escaped


def test_html_report_takes_left_out_rows_as_a_list(sensor):
    page, _ = _report(*sensor, left_out=[{"lines": [8], "reason": "blank well"}, {"line": 30, "reason": None}])
    assert "<td>blank well</td><td>1</td><td>8</td>" in page
    assert "<td>no reason given</td><td>1</td><td>30</td>" in page


def test_the_report_names_the_degreescope_version_that_made_it(fit_service):
    # the hand-over's provenance: the same version string the model file records (app.handover)
    from conftest import SAMPLES

    from app import handover
    from app.panels import charts, downloads

    info = fit_service.load_path(SAMPLES / "cubic_small_noisy.csv")
    st = info.to_store()
    key = charts.on_split(fit_service, st, st["x"], st["y"], None, None, "holdout", 25, 10, 0)["split_key"]
    report = downloads.on_export(fit_service, "report", key, 3, [], "")["download"]["content"]
    assert f"by degreescope {handover.degreescope_version()}" in report
