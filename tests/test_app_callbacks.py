"""Callbacks as plain functions: upload, pickers from the URL, split, degree patch, model, errors."""

from __future__ import annotations

import base64

import pytest
from dash import Patch, no_update

import app
from app import callbacks as cb
from app import ids


def data_url(text: str) -> str:
    return "data:text/csv;base64," + base64.b64encode(text.encode("utf-8")).decode()


DECIMAL_COMMA = "Spannung (V);Strom (mA)\n" + "\n".join(
    f"{v / 10:.1f}".replace(".", ",")
    + ";"
    + f"{2 + 3 * v / 10 + 0.2 * (v / 10) ** 2 + 0.01 * (v % 3):.3f}".replace(".", ",")
    for v in range(1, 41)
)


def split(service, store, **kw):
    args = dict(
        x=store["x"],
        y=store["y"],
        weights=None,
        group=None,
        mode="holdout",
        holdout=25,
        folds=10,
        seed=0,
        degree=None,
        bands=["confidence"],
    )
    args.update(kw)
    return cb.on_split(service, store, *args.values())


def test_upload_decimal_comma_then_pickers_and_charts(fit_service):
    store, notice = cb.on_upload(fit_service, data_url(DECIMAL_COMMA), "strom.csv")
    assert store["x"] == "Spannung (V)" and "40 rows" in notice
    out = cb.on_dataset(fit_service, store, "")
    intake, x_opts, x = out[0], out[1], out[2]
    assert x == "Spannung (V)" and out[4] == "Strom (mA)"
    text = str([c.to_plotly_json() for c in intake])
    assert "decimal mark ','" in text and "semicolon" in text
    res = split(fit_service, store)
    fit_fig, err_fig, max_deg, _, new_degree, rec, *_rest, key, notice = res
    assert notice == "" and key["dataset"] == store["id"]
    assert isinstance(new_degree, int) and f"{new_degree}" in rec  # lands on the recommended degree


def test_url_settings_apply_to_a_file_with_the_same_columns(sensor):
    service, info, cols = sensor
    key = cb.split_key(info.to_store(), cols.x, cols.y, None, "batch", "kfold", 30, 5, 7)
    q = cb.url_query(key, 6)
    out = cb.on_dataset(service, info.to_store(), q)
    assert out[2] == cols.x and out[8] == "batch" and out[9] == "kfold"
    assert (out[10], out[11], out[12], out[13]) == (30, 5, 7, 6)
    other = cb.on_dataset(service, info.to_store(), "?x=nope&y=also&degree=9")
    assert other[2] == info.default_x and other[13] is None  # names not in this file: defaults


def test_degree_change_sends_patches_and_the_alert(fit_service, sample_dir):
    info = fit_service.load_path(sample_dir / "cubic_small_noisy.csv")
    store = info.to_store()
    key = split(fit_service, store)[12]
    fit_p, err_p, alert, cls, readout, notice = cb.on_degree(fit_service, 11, 11, ["confidence"], key, "value")
    assert isinstance(fit_p, Patch) and isinstance(err_p, Patch)
    assert cls == "alert alert-on" and "degree 11" in str([a.to_plotly_json() for a in alert])
    _, _, alert, cls, readout, _ = cb.on_degree(fit_service, 3, 3, ["confidence"], key, "value")
    assert alert == [] and cls == "alert alert-off" and readout.startswith("degree 3")


def test_model_outputs_table_equation_and_url(sensor):
    service, info, cols = sensor
    key = split(service, info.to_store(), mode="kfold")[12]
    stats, eq, table, resid, note, search = cb.on_model(service, key, 2)
    assert eq.startswith("y = ") and "x^2" in eq
    assert "degree=2" in search and "mode=kfold" in search
    assert cb.parse_query(search)["x"] == cols.x
    assert "Student's t" in note


def test_a_failing_callback_shows_a_message_and_leaves_the_rest(sensor, monkeypatch, caplog):
    service, info, _ = sensor
    gone = dict(info.to_store(), id="no-such-id")
    res = split(service, gone)
    assert all(v is no_update for v in res[:13])
    assert "upload the file again" in str(res[13].to_plotly_json())

    def boom(*a, **k):
        raise RuntimeError("unexpected")

    monkeypatch.setattr(service, "split_view", boom)
    res = split(service, info.to_store())
    assert cb.INTERNAL_ERROR in str(res[13].to_plotly_json())
    assert "callback failed" in caplog.text and "RuntimeError" in caplog.text


def test_oversize_upload_message(sample_dir):
    from app.service import FitService
    from app.store import DatasetStore

    small = FitService(DatasetStore(), upload_limit_bytes=2000)
    store, notice = cb.on_upload(small, data_url("x,y\n" + "1,2\n" * 1000), "big.csv")
    assert store is no_update and "over this server's upload limit" in str(notice.to_plotly_json())


def test_exports(sensor):
    service, info, cols = sensor
    key = split(service, info.to_store())[12]
    data, _ = cb.on_export(service, "model", key, 3, ["confidence"], "")
    assert data["filename"].endswith(".model.json") and '"degree": 3' in data["content"]
    data, _ = cb.on_export(service, "csv", key, 3, [], "500, 3000")
    assert data["content"].count("\n") == 3
    data, _ = cb.on_export(service, "csv", key, 3, [], "")
    assert data["content"].count("\n") == 121  # every data row
    data, _ = cb.on_export(service, "report", key, 3, ["confidence"], "")
    assert data["filename"].endswith(".report.html") and data["content"].startswith("<!DOCTYPE html>")


def test_factory_is_side_effect_free_on_import_and_builds_an_app():
    import dash

    a = app.create_app(upload_limit_bytes=5000)
    assert isinstance(a, dash.Dash) and a.server is not None
    layout = a.layout() if callable(a.layout) else a.layout
    ids_in_page = {c.id for c in layout._traverse() if getattr(c, "id", None)}
    for stable in (
        ids.UPLOAD,
        ids.X_COLUMN,
        ids.Y_COLUMN,
        ids.DEGREE,
        ids.HOLDOUT,
        ids.FIT_CHART,
        ids.ERROR_CHART,
        ids.OVERFIT_ALERT,
        ids.RECOMMENDED_DEGREE,
        ids.COEFFICIENTS,
    ):
        assert stable in ids_in_page, stable
    upload = next(c for c in layout._traverse() if getattr(c, "id", None) == ids.UPLOAD)
    assert upload.max_size > 5000  # a bit above, so the server's message is what users see


def test_bad_data_path_fails_at_start(tmp_path):
    from fitting import DegreescopeError

    bad = tmp_path / "empty.csv"
    bad.write_text("")
    with pytest.raises(DegreescopeError):
        app.create_app(str(bad))


def test_a_long_list_of_x_values_shows_a_short_table_and_says_so(sensor):
    # 600 typed x values: the page shows the first rows only (a tall table made the page crawl); the CSV has all
    service, info, cols = sensor
    key = split(service, info.to_store(), mode="kfold")[12]
    text = ", ".join(str(500 + i) for i in range(600))
    out = cb.on_predict(service, text, key, 2)
    flat = str(out.to_plotly_json())
    assert "first 50 of 600" in flat
    table = out.children[0]
    assert len(table.children[1].children) == cb.PREDICT_ROWS_SHOWN
    data, _ = cb.on_export(service, "csv", key, 2, [], text)
    assert data["content"].count("\n") == 601  # header + every typed value
