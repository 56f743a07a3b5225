"""One writer for what is handed over (app/handover.py): model file and predictions table.

References named beside each check:
* Python's ``hashlib.sha256`` (the file's digest) and ``importlib.metadata`` (the version).
* Python's ``csv`` reader (the predictions table parses back to the same numbers).
* OWASP "CSV Injection" guidance for the leading characters ``= + - @ TAB CR``.
* RFC 8259 / Python's ``json`` with ``allow_nan=False`` (strict JSON: no NaN).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import numpy as np
import pytest

from app import handover
from fitting import PolynomialFit, fit_polynomial, read_table

ROOT = Path(__file__).resolve().parent.parent
SENSOR = ROOT / "sample_data" / "sensor_calibration.csv"


def cli(*args, stdin=None):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", *map(str, args)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
        input=stdin,
    )
    return proc.returncode, proc.stdout, proc.stderr


def _sensor_fit(degree=2):
    sel = read_table(SENSOR).select("output (mV)", "temperature (°C)")
    fit = fit_polynomial(sel.x, sel.y, degree, x_name=sel.x_name, y_name=sel.y_name)
    return sel, fit


def test_version_from_package_metadata():
    try:
        expected = metadata.version("degreescope")
    except metadata.PackageNotFoundError:
        expected = "0+unknown"
    assert handover.degreescope_version() == expected


def test_file_sha256_matches_hashlib(tmp_path):
    data = os.urandom(3 * (1 << 20) + 17)  # more than one read chunk
    path = tmp_path / "blob.bin"
    path.write_bytes(data)
    assert handover.file_sha256(path) == hashlib.sha256(data).hexdigest() == handover.file_sha256(data)


def test_model_file_carries_provenance_and_round_trips():
    sel, fit = _sensor_fit(3)
    prov = handover.provenance(
        file_name=SENSOR.name,
        sha256=handover.file_sha256(SENSOR),
        x=sel.x_name,
        y=sel.y_name,
        rows_used=sel.rows_used,
        rows_dropped=sel.rows_dropped,
        dropped={"missing or non-numeric y": {"count": 2, "first_lines": [9, 12]}},
    )
    text = handover.model_json(fit, prov)
    doc = json.loads(text)
    block = doc[handover.PROVENANCE_KEY]
    assert block["sha256"] == hashlib.sha256(SENSOR.read_bytes()).hexdigest()
    assert block["x"] == "output (mV)" and block["y"] == "temperature (°C)"
    assert block["weights"] is None and block["group"] is None
    assert block["rows_used"] == 120 and block["rows_left_out"]["missing or non-numeric y"]["first_lines"] == [9, 12]
    assert block["fitted_on"].startswith("every usable row") and "\n" not in block["fitted_on"]
    assert block["degreescope_version"] == handover.degreescope_version()
    back = PolynomialFit.from_dict(doc)
    xs = np.linspace(100, 1700, 7)
    np.testing.assert_allclose(back.predict(xs), fit.predict(xs), rtol=1e-13)


def test_model_json_is_strict_json_without_nan():
    x = np.array([0.0, 1.0, 2.0, 3.0])
    fit = fit_polynomial(x, np.array([1.0, 0.0, 5.0, 2.0]), 3)  # no residual dof: residual SD is NaN
    text = handover.model_json(fit)
    json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))
    assert json.loads(text)["residual_sd"] is None
    assert json.loads(text)["fitted_from"] == {"degreescope_version": handover.degreescope_version()}


def test_predictions_table_header_and_cells():
    _, fit = _sensor_fit(2)
    xs = np.array([100.0, 900.0, 5000.0])
    conf, pred = fit.band(xs, "confidence", 0.9), fit.band(xs, "prediction", 0.9)
    text = handover.predictions_csv(
        xs, fit.predict(xs), conf, pred, fit.outside_domain(xs), x_name="=x", y_name="y (V)", level=0.9
    )
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[0] == [
        "'=x",  # OWASP: a name a spreadsheet would run is quoted
        "y (V) (predicted)",
        "confidence lower 90%",
        "confidence upper 90%",
        "prediction lower 90%",
        "prediction upper 90%",
        "outside fitted range",
    ]
    body = np.array([[float(v) for v in r[:-1]] for r in rows[1:]])
    np.testing.assert_array_equal(body[:, 0], xs)  # repr round-trips exactly
    np.testing.assert_array_equal(body[:, 1], fit.predict(xs))
    np.testing.assert_array_equal(body[:, 2], conf[0])
    assert [r[-1] for r in rows[1:]] == ["no", "no", "yes"]


@pytest.mark.parametrize(
    "value,text",
    [
        (-1.5, "-1.5"),
        (np.float64(2.5), "2.5"),
        (np.int64(3), "3"),
        (float("nan"), ""),
        (None, ""),
        (np.bool_(True), "yes"),
    ],
)
def test_csv_cell_numbers_stay_numbers(value, text):
    assert handover.csv_cell(value) == text


def test_plain_rmse_from_data_matches_numpy_and_prefers_the_fits_own():
    rng = np.random.default_rng(3)  # invented data
    x = np.linspace(1, 10, 30)
    y = 2 + 0.5 * x + rng.normal(0, 0.2, x.size)
    w = 1 / x
    fit = fit_polynomial(x, y, 1, weights=w)
    resid = y - fit.predict(x)
    assert handover.plain_rmse(fit, x, y) == pytest.approx(np.sqrt(np.mean(resid**2)), rel=1e-12)

    class WithOwn:
        plain_rmse = 1.25

    assert handover.plain_rmse(WithOwn(), x, y) == 1.25


def test_command_line_and_dashboard_write_the_same_predictions_header(tmp_path, sensor):
    from app import exports
    from app.service import SplitSettings

    model = tmp_path / "m.json"
    assert cli("fit", SENSOR, "--degree", 2, "--save-model", model)[0] == 0
    out = tmp_path / "p.csv"
    rc, _, err = cli("predict", model, "--at", 500, 900, "--output", out)
    assert rc == 0, err
    cli_header = out.read_text().splitlines()[0]

    service, info, cols = sensor
    p = service.predict(info.id, cols, SplitSettings(mode="kfold"), 2, np.array([500.0, 900.0]))
    dash_header = exports.predictions_csv(p, x_name=cols.x, y_name=cols.y).splitlines()[0]
    assert cli_header == dash_header
    assert "confidence lower 95%" in cli_header


def test_command_line_model_file_provenance(tmp_path):
    model = tmp_path / "m.json"
    rc, _, err = cli("fit", SENSOR, "--degree", 2, "--save-model", model)
    assert rc == 0, err
    block = json.loads(model.read_text())["fitted_from"]
    for key in ("file", "sha256", "x", "y", "weights", "group", "rows_used", "rows_dropped", "rows_left_out"):
        assert key in block, key
    assert block["file"] == SENSOR.name and block["sha256"] == hashlib.sha256(SENSOR.read_bytes()).hexdigest()
    assert block["degreescope_version"] == handover.degreescope_version()
    assert block["fitted_on"] == "every usable row of sensor_calibration.csv (120 rows); none was held out"


def test_read_back_table_header_cells_and_neutralised_notes():
    """The read-back table parses back (csv) to the same numbers; missing x empty; notes neutralised (OWASP)."""
    rows = [
        {"line": 7, "y": 1.5, "readings": 3, "x": 2.25, "x_lower": 2.0, "x_upper": None, "u_x": 0.125,
         "outside_range": False, "roots": [2.25], "warnings": ["The upper end is not bounded."]},
        {"line": 8, "y": -4.0, "readings": 3, "x": None, "x_lower": None, "x_upper": None, "u_x": None,
         "outside_range": False, "roots": [-1.5, 3.0], "warnings": ["=matches two"]},
    ]  # fmt: skip
    text = handover.read_back_csv(rows, x_name="conc", y_name="area", level=0.9, with_lines=True)
    got = list(csv.reader(io.StringIO(text)))
    assert got[0] == handover.read_back_header("conc", "area", 0.9, with_lines=True)
    assert got[0][:4] == ["line", "area (reading)", "readings averaged", "conc (read back)"]
    assert got[0][4:6] == ["calibration lower 90%", "calibration upper 90%"]
    assert got[1][:8] == ["7", "1.5", "3", "2.25", "2.0", "", "0.125", "no"]
    assert got[1][8:] == ["1", "x = 2.25", "The upper end is not bounded."]
    assert got[2][3] == "" and got[2][8] == "2"
    assert got[2][9] == "x = -1.5; x = 3.0"  # begins with a letter: nothing to neutralise
    assert got[2][10] == "'=matches two"
    plain = handover.read_back_csv(rows[:1], x_name="conc", y_name="area")
    assert next(csv.reader(io.StringIO(plain)))[0] == "area (reading)"


def test_provenance_records_rows_left_out_on_purpose_and_the_summary_sits_beside_it():
    """rows_excluded and the fitted_on sentence; the back-calculation summary beside fitted_from (strict JSON)."""
    sel, fit = _sensor_fit(2)
    plain = handover.provenance(file_name="f.csv", sha256=None, x="a", y="b", rows_used=10)
    assert "rows_excluded" not in plain and plain["fitted_on"].startswith("every usable row")
    prov = handover.provenance(
        file_name="f.csv", sha256=None, x="a", y="b", rows_used=8, excluded={"lines": [12, 9], "reason": "spilt"}
    )
    assert prov["rows_excluded"] == {"lines": [12, 9], "reason": "spilt"}
    assert "except 2 left out on purpose, lines 12, 9 (spilt)" in prov["fitted_on"]
    summary = {"summary": {"accepted": True, "share_passing_percent": float("nan")}, "rule": "r", "tolerance": 15.0}
    doc = json.loads(handover.model_json(fit, prov, back_calculation=summary))
    assert doc[handover.PROVENANCE_KEY] == prov
    assert doc[handover.BACK_CALCULATION_KEY]["summary"] == {"accepted": True, "share_passing_percent": None}
    assert handover.BACK_CALCULATION_KEY not in handover.model_document(fit, prov)
