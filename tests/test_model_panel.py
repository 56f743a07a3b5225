"""The model card, the predictions and the downloads: what a user sees, shares and hands over.

References named beside each check:
* numpy's ``polynomial.polynomial.polyfit`` (least squares; its ``w`` multiplies residuals, so
  w = sqrt(weight) for inverse-variance weights) for the every-row fit and the plain RMSE.
* Python's ``hashlib.sha256`` for the file digest.
* The command line (``degreescope fit`` / ``predict``, run as a subprocess) for provenance and
  for reading the dashboard's model file back.
The calibration data below are invented for these tests.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from app import components, text, views_model
from app.panels import downloads, model, predict
from app.panels.settings import split_key
from app.service import Columns, FitService, SplitSettings
from app.store import DatasetStore

ROOT = Path(__file__).resolve().parent.parent


def cli(*args):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", *map(str, args)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
    )
    return proc.returncode, proc.stdout, proc.stderr


def pressure_csv() -> str:
    """Invented: a 19-point pressure transducer calibration, 0-1000 kPa (full scale), output in mV."""
    p = np.linspace(0.0, 1000.0, 19)
    wiggle = 0.004 * np.sin(np.arange(19) * 1.7)  # fixed, deterministic "noise"
    mv = 0.5 + 0.1 * p - 2.0e-6 * p**2 + wiggle
    rows = "\n".join(f"{a:.4f},{b:.6f}" for a, b in zip(p, mv, strict=True))
    return "pressure (kPa),output (mV)\n" + rows + "\n"


def service() -> FitService:
    return FitService(DatasetStore(), upload_limit_bytes=16 * 2**20)


def key_for(svc, info, mode="holdout", *, x=None, y=None, weights=None, group=None):
    return split_key(info.to_store(), x or info.default_x, y or info.default_y, weights, group, mode, 25, 10, 0)


def cells(component) -> list[str]:
    """The text of every cell of an HTML table component, in order."""
    out = []

    def walk(c):
        if isinstance(c, str):
            return c
        kids = getattr(c, "children", None)
        if kids is None:
            return ""
        if isinstance(kids, (list, tuple)):
            return "".join(walk(k) for k in kids)
        return walk(kids)

    for c in component._traverse():
        if type(c).__name__ in ("Td", "Th"):
            out.append(walk(c))
    return out


# -- 1. the hand-over model is fitted on every usable row ------------------------------


def test_default_holdout_view_hands_over_the_fit_on_every_row(tmp_path):
    svc = service()
    info = svc.load_bytes(pressure_csv().encode(), "pressure.csv")
    key = key_for(svc, info)  # the default view: a 25 % random holdout
    ds, cols, split = downloads.from_key(key)
    assert svc.split_view(ds, cols, split).test_x.size > 0  # the charts do hold rows out
    file = downloads.on_export(svc, "model", key, 2, ["confidence"], "")["download"]
    doc = json.loads(file["content"])
    assert doc["rows_used"] == 19 and doc["domain"] == [0.0, 1000.0]
    # reference: numpy's least squares on all 19 rows
    p = np.linspace(0.0, 1000.0, 19)
    sel = svc.selection(ds, cols)
    ref = np.polynomial.polynomial.polyfit(sel.x, sel.y, 2)
    np.testing.assert_allclose(doc["coefficients"], ref, rtol=1e-9, atol=1e-12)
    path = tmp_path / file["filename"]
    path.write_text(file["content"], encoding="utf-8")
    rc, out, err = cli("predict", path, "--at", 1000, "--json")
    assert rc == 0, err
    answer = json.loads(out)
    assert answer["rows"][0]["outside_range"] is False and answer["outside_range_count"] == 0
    assert answer["domain"] == [p.min(), p.max()] == [0.0, 1000.0]  # the full-scale standard is inside


def test_card_csv_and_report_describe_the_every_row_fit():
    svc = service()
    info = svc.load_bytes(pressure_csv().encode(), "pressure.csv")
    key = key_for(svc, info)
    out = model.on_model(svc, key, 2)
    assert "every usable row (19 rows)" in out["handover"]
    assert out["handover"].count(".") <= 3 and "\n" not in out["handover"]
    csv_rows = downloads.on_export(svc, "csv", key, 2, [], "")["download"]["content"].splitlines()
    assert len(csv_rows) == 20 and csv_rows[-1].endswith(",no")  # 1000 kPa: inside the fitted range
    table = predict.on_predict(svc, "1000, 1100", key, 2)["table"]
    flags = cells(table)[-5:]
    assert flags[-1].startswith("outside") and all("outside" not in c for c in cells(table)[5:10])
    report = downloads.on_export(svc, "report", key, 2, ["confidence"], "")["download"]["content"]
    assert "every one of the 19 rows" in report and "to 1000" in report


def test_the_split_fit_stays_the_chart_curve_and_is_named_for_its_rows():
    assert text.curve_label(3, "holdout") == "degree 3 fit on the training rows"
    assert text.curve_label(3, "ordered") == "degree 3 fit on the training rows"
    assert text.curve_label(3, "kfold") == "degree 3 fit (every row)"


# -- 2. weighted fits say so -------------------------------------------------------------


def weighted_csv() -> str:
    """Invented: a thermistor-like resistance in kΩ with a weights column (1 / variance)."""
    t = np.linspace(0.0, 90.0, 16)
    r = 32.0 * np.exp(-0.04 * t) + 0.02 * np.cos(np.arange(16) * 2.3)
    w = 1.0 / (0.01 + 0.002 * r) ** 2
    rows = "\n".join(f"{a:.2f},{b:.6f},{c:.6f}" for a, b, c in zip(t, r, w, strict=True))
    return "temperature (°C),R (kΩ),w\n" + rows + "\n"


def test_weighted_rmse_is_named_and_the_plain_rmse_is_shown():
    svc = service()
    info = svc.load_bytes(weighted_csv().encode(), "thermistor.csv")
    key = key_for(svc, info, "kfold", x="temperature (°C)", y="R (kΩ)", weights="w")
    out = model.on_model(svc, key, 3)
    flat = cells(out["stats"])
    assert "weighted RMSE" in flat and "RMSE" not in flat  # no bare "RMSE" row for a weighted fit
    plain_label = next(c for c in flat if c.startswith("RMSE, unweighted"))
    assert "kΩ" in plain_label
    shown = float(flat[flat.index(plain_label) + 1])
    # reference: numpy polyfit with w = sqrt(weight) (numpy's w multiplies the residual), then plain RMSE
    ds, cols, _ = downloads.from_key(key)
    sel = svc.selection(ds, cols)
    c = np.polynomial.polynomial.polyfit(sel.x, sel.y, 3, w=np.sqrt(sel.weights))
    res = sel.y - np.polynomial.polynomial.polyval(sel.x, c)
    assert shown == pytest.approx(np.sqrt(np.mean(res**2)), rel=1e-4)
    # the intervals say which weight they assume at a new x
    assert "weight of 1 at a new x" in out["note"] and "Weighted fit" in out["note"]


# -- 3. numbers, names and units -----------------------------------------------------------


def test_rounding_noise_reads_zero_and_r2_near_one_is_never_one():
    svc = service()
    x = np.arange(-9, 10)
    exact = "x,y\n" + "\n".join(f"{a},{a * a}" for a in x) + "\n"
    info = svc.load_bytes(exact.encode(), "square.csv")
    key = key_for(svc, info, "kfold")
    line = cells(model.on_model(svc, key, 1)["stats"])
    assert line[line.index("R²") + 1] == "0"  # a line through a symmetric parabola: R² is 0 exactly
    exact_fit = cells(model.on_model(svc, key, 2)["stats"])
    assert exact_fit[exact_fit.index("RMSE") + 1] == "0"  # y = x² exactly: the RMSE is rounding noise
    sensor = FitService(DatasetStore(), upload_limit_bytes=2**24)
    info = sensor.load_path(ROOT / "sample_data" / "sensor_calibration.csv")
    table = cells(model.on_model(sensor, key_for(sensor, info, "kfold"), 3)["stats"])
    r2 = table[table.index("R²") + 1]
    assert r2 != "1" and float(r2) < 1.0 and r2.startswith("0.99999")


def test_kfold_caption_and_card_show_one_r2():
    svc = FitService(DatasetStore(), upload_limit_bytes=2**24)
    info = svc.load_path(ROOT / "sample_data" / "sensor_calibration.csv")
    key = key_for(svc, info, "kfold")
    ds, cols, split = downloads.from_key(key)
    for d in (1, 2, 4):
        view, dv = svc.split_view(ds, cols, split), svc.degree_view(ds, cols, split, d)
        caption = text.degree_caption(view, dv)[0]
        train_r2, test_r2 = re.search(r"R² train (\S+), CV test (\S+)", caption).groups()
        table = cells(model.on_model(svc, key, d)["stats"])
        assert table[table.index("R²") + 1] == train_r2
        assert table[table.index("R²") + 2] == test_r2
        rmse = re.search(r"CV test RMSE (.+?) ·", caption).group(1)
        assert table[table.index("RMSE") + 2] == rmse


def test_constant_term_units_once_and_file_names_keep_greek_letters():
    svc = service()
    body = "Output [V],R (kΩ)\n" + "\n".join(f"{v / 10:.2f},{3 + 2 * v / 10 + 0.1 * (v % 3):.4f}" for v in range(30))
    info = svc.load_bytes(body.encode(), "bridge.csv")
    key = key_for(svc, info, "kfold", x="Output [V]", y="R (kΩ)")
    coef = cells(model.on_model(svc, key, 2)["coefficients"])
    assert coef[5] == "constant" and "1" not in coef[5::5][:1]
    head = cells(predict.on_predict(svc, "1.5", key, 2)["table"])[:5]
    assert head[0] == "Output [V]" and "(V)" not in head[0] and head[1] == "predicted R (kΩ)"
    name = downloads.on_export(svc, "model", key, 2, [], "")["download"]["filename"]
    assert name == "degreescope-R-kΩ-degree2.model.json"
    assert downloads.slug("ΔT / Ω") == "ΔT-Ω" and downloads.slug("../../etc/passwd") == "etc-passwd"


# -- 4. provenance as the command line writes it --------------------------------------------


def test_dashboard_model_file_carries_the_command_lines_provenance(tmp_path):
    src = tmp_path / "pressure.csv"
    src.write_text(pressure_csv() + "oops,not a number\n", encoding="utf-8")
    svc = service()
    info = svc.load_bytes(src.read_bytes(), "pressure.csv")
    key = key_for(svc, info)
    doc = json.loads(downloads.on_export(svc, "model", key, 2, [], "")["download"]["content"])
    block = doc["fitted_from"]
    assert block["sha256"] == hashlib.sha256(src.read_bytes()).hexdigest()  # reference: hashlib
    cli_model = tmp_path / "cli.json"
    rc, _, err = cli("fit", src, "--degree", 2, "--save-model", cli_model)
    assert rc == 0, err
    cli_block = json.loads(cli_model.read_text())["fitted_from"]
    assert block == cli_block
    assert block["rows_used"] == 19 and block["rows_dropped"] == 1 and block["rows_left_out"]
    assert doc["coefficients"] == pytest.approx(json.loads(cli_model.read_text())["coefficients"], rel=1e-12)


def test_a_file_read_from_disk_records_its_digest(tmp_path):
    svc = FitService(DatasetStore(), upload_limit_bytes=2**24)
    path = ROOT / "sample_data" / "sensor_calibration.csv"
    info = svc.load_path(path)
    assert views_model.dataset_sha256(svc, info.id) == hashlib.sha256(path.read_bytes()).hexdigest()


# -- 6. words a newcomer knows --------------------------------------------------------------


def test_every_error_chart_mark_is_explained_in_plain_words():
    svc = FitService(DatasetStore(), upload_limit_bytes=2**24)
    info = svc.load_path(ROOT / "sample_data" / "sensor_calibration.csv")
    view = svc.split_view(info.id, Columns(info.default_x, info.default_y), SplitSettings())
    key = text.error_chart_key(view)
    for mark in ("Blue", "Amber", "Dashed grey", "pale red column", "red ring", "green star"):
        assert mark in key, mark
    assert "recommendation rests on" in key
    assert "extrapolation" in text.fit_chart_key("holdout") and "training rows only" in text.fit_chart_key("holdout")


def test_components_table_helpers_are_plain_functions():
    svc = service()
    info = svc.load_bytes(pressure_csv().encode(), "pressure.csv")
    ds, cols, split = downloads.from_key(key_for(svc, info))
    m = views_model.handover_model(svc, ds, cols, split, 2)
    assert m.fit.n == 19 and m.every_row
    assert svc.model_view(ds, cols, split, 2).fit.n < 19  # the split's own fit is still the training rows'
    assert isinstance(components.model_stats_table(m), type(components.model_coefficient_table(m)))


def test_tiny_r2_and_rmse_read_zero_and_a_near_one_r2_keeps_its_digits():
    from dataclasses import replace

    svc = service()
    info = svc.load_bytes(pressure_csv().encode(), "pressure.csv")
    ds, cols, split = downloads.from_key(key_for(svc, info))
    m = views_model.handover_model(svc, ds, cols, split, 2)
    y_scale = 100.5  # the largest |y| of this calibration, in mV
    tiny = replace(m, fit=replace(m.fit, r_squared=5.42e-20, rmse=3.1e-38, adjusted_r_squared=-0.0625))
    table = cells(components.model_stats_table(tiny, y_scale))
    assert table[table.index("RMSE") + 1] == "0" and table[table.index("R²") + 1] == "0"
    near = replace(m, fit=replace(m.fit, r_squared=0.9999975))
    table = cells(components.model_stats_table(near, y_scale))
    assert table[table.index("R²") + 1] == "0.9999975"  # never "1"


def test_weighted_predictions_say_which_weight_their_intervals_assume():
    svc = service()
    info = svc.load_bytes(weighted_csv().encode(), "thermistor.csv")
    key = key_for(svc, info, "kfold", x="temperature (°C)", y="R (kΩ)", weights="w")
    flat = str(predict.on_predict(svc, "20, 45", key, 3)["table"].to_plotly_json())
    assert "weight of 1 at a new x" in flat
    plain = service()
    info = plain.load_bytes(pressure_csv().encode(), "pressure.csv")
    assert "weight" not in str(predict.on_predict(plain, "500", key_for(plain, info), 2)["table"].to_plotly_json())
