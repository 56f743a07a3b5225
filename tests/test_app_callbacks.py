"""Callbacks as plain functions: upload, pickers from the URL, split, degree patch, model, errors."""

from __future__ import annotations

import base64
import json

import numpy as np
import pytest

import app
from app import ids
from app.components import PREDICT_ROWS_SHOWN
from app.panels import INTERNAL_ERROR, charts, data, degree, downloads, model, predict, split
from app.panels.settings import parse_query, split_key, url_query
from app.service import FitService, parse_x_values
from fitting import DegreescopeError


def data_url(text: str) -> str:
    return "data:text/csv;base64," + base64.b64encode(text.encode("utf-8")).decode()


DECIMAL_COMMA = "Spannung (V);Strom (mA)\n" + "\n".join(
    f"{v / 10:.1f}".replace(".", ",")
    + ";"
    + f"{2 + 3 * v / 10 + 0.2 * (v / 10) ** 2 + 0.01 * (v % 3):.3f}".replace(".", ",")
    for v in range(1, 41)
)


def run_split(service, store, **kw):
    args = dict(
        dataset=store,
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
    return charts.on_split(service, **args)


def test_upload_decimal_comma_then_pickers_and_charts(fit_service):
    up = data.on_upload(fit_service, data_url(DECIMAL_COMMA), "strom.csv")
    store, notice = up["dataset"], up["notice"]
    assert store["x"] == "Spannung (V)" and "40 rows" in notice
    assert store["decimal"] == ","  # the record knows the file's decimal mark
    out = data.on_dataset(fit_service, store, "")
    intake, x = out["intake"], out["x"]
    assert x == "Spannung (V)" and out["y"] == "Strom (mA)"
    text = str([c.to_plotly_json() for c in intake])
    assert "decimal mark ','" in text and "semicolon" in text
    res = run_split(fit_service, store)
    key, notice, new_degree, rec = res["split_key"], res["notice"], res["degree"], res["recommended_degree"]
    assert notice == "" and key["dataset"] == store["id"]
    assert isinstance(new_degree, int) and f"{new_degree}" in rec  # lands on the recommended degree
    # typed x values follow the file's decimal mark: "2,5" is one value, ";" and new lines separate
    table = predict.on_predict(fit_service, "2,5; 3\n1,25", key, new_degree)["table"]
    cells = [row.children[0].children for row in table.children[1].children]
    assert cells == ["2.5", "3", "1.25"]


def test_url_settings_apply_to_a_file_with_the_same_columns(sensor):
    service, info, cols = sensor
    key = split_key(info.to_store(), cols.x, cols.y, None, "batch", "kfold", 30, 5, 7)
    q = url_query(key, 6)
    out = data.on_dataset(service, info.to_store(), q)
    assert out["x"] == cols.x and out["group"] == "batch" and out["mode"] == "kfold"
    assert (out["holdout"], out["folds"], out["seed"], out["degree"]) == (30, 5, 7, 6)
    other = data.on_dataset(service, info.to_store(), "?x=nope&y=also&degree=9")
    assert other["x"] == info.default_x and other["degree"] is None  # names not in this file: defaults
    odd = data.on_dataset(service, info.to_store(), q.replace("degree=6", "degree=inf").replace("k=5", "k=nan"))
    assert odd["degree"] is None and odd["folds"] == 10  # not numbers: defaults, never a traceback


def test_degree_change_sends_the_alert_and_no_figure(fit_service, sample_dir):
    # the charts follow a degree change in the browser (panels/degree.py CURVE_JS, MARK_JS)
    info = fit_service.load_path(sample_dir / "cubic_small_noisy.csv")
    store = info.to_store()
    key = run_split(fit_service, store)["split_key"]
    out = degree.on_degree(fit_service, 11, key)
    assert set(out) == {"alert", "alert_class", "readout", "notice"}
    assert out["alert_class"] == "alert alert-on" and "degree 11" in str([a.to_plotly_json() for a in out["alert"]])
    out = degree.on_degree(fit_service, 3, key)
    assert out["alert"] == [] and out["alert_class"] == "alert alert-off" and out["readout"].startswith("degree 3")


def test_model_outputs_table_equation_and_url(sensor):
    service, info, cols = sensor
    key = run_split(service, info.to_store(), mode="kfold")["split_key"]
    out = model.on_model(service, key, 2)
    eq, search, note = out["equation"], out["search"], out["note"]
    assert eq.startswith("y = ") and "x^2" in eq
    assert "degree=2" in search and "mode=kfold" in search
    assert parse_query(search)["x"] == cols.x
    assert "Student's t" in note


def dash_call(dash_app, first_output: str, values: dict) -> dict:
    """POST one callback request the way the page does; ``values`` maps "id.prop" to its value.

    The callback is the one whose first output is ``first_output`` ("id.prop"), preferring the one that
    does not share it (``allow_duplicate``).
    """
    firsts = {k: k.strip(".").split("...")[0] for k in dash_app.callback_map}
    key = next((k for k, f in firsts.items() if f == first_output), None)
    key = key or next(k for k, f in firsts.items() if f.split("@")[0] == first_output)
    spec = dash_app.callback_map[key]

    def deps(items):
        return [dict(item, value=values.get(f"{item['id']}.{item['property']}")) for item in items]

    names = [part.split("@")[0] for part in key.strip(".").split("...")]
    outputs = [{"id": n.split(".")[0], "property": n.split(".")[1]} for n in names]
    body = {
        "output": key,
        "outputs": outputs,
        "inputs": deps(spec["inputs"]),
        "state": deps(spec["state"]),
        "changedPropIds": [f"{spec['inputs'][0]['id']}.{spec['inputs'][0]['property']}"],
    }
    client = dash_app.server.test_client()
    client.get("/")  # the page, so the callbacks are set up as for a visit
    res = client.post("/_dash-update-component", json=body)
    assert res.status_code in (200, 204), res.data[:500]
    return json.loads(res.data) if res.status_code == 200 else {}


def split_values(store, **kw) -> dict:
    v = {
        "dataset.data": store,
        "x-column.value": store["x"],
        "y-column.value": store["y"],
        "split-mode.value": "holdout",
        "holdout.value": 25,
        "folds.value": 10,
        "seed.value": 0,
        "bands.value": ["confidence"],
    }
    v.update(kw)
    return v


def test_a_failing_callback_shows_a_message_and_leaves_the_rest(monkeypatch, caplog):
    # through Dash itself: the panel's on_error puts the message in its notice; no other output changes
    dash_app = app.create_app()
    store = next(c for c in dash_app.layout()._traverse() if getattr(c, "id", None) == ids.DATASET).data
    gone = dict(store, id="no-such-id")
    out = dash_call(dash_app, "fit-points.figure", split_values(gone))
    assert list(out["response"]) == [ids.FIT_NOTICE]  # every other output keeps its value
    assert "upload the file again" in json.dumps(out["response"][ids.FIT_NOTICE])

    def boom(*a, **k):
        raise RuntimeError("unexpected")

    monkeypatch.setattr(FitService, "split_view", boom)
    out = dash_call(dash_app, "fit-points.figure", split_values(store))
    assert list(out["response"]) == [ids.FIT_NOTICE]
    assert INTERNAL_ERROR in json.dumps(out["response"][ids.FIT_NOTICE])
    assert "callback failed" in caplog.text and "RuntimeError" in caplog.text
    # a notice that is not an output of its callback is set beside the answer (set_props)
    monkeypatch.setattr(split, "whole", boom)
    out = dash_call(dash_app, "seed.value", {"new-split.n_clicks": 1, "seed.value": 0})
    assert "response" not in out or out["response"] == {}
    assert INTERNAL_ERROR in json.dumps(out["sideUpdate"][ids.SPLIT_NOTE])


def test_a_degree_that_is_not_a_number_gives_a_message_not_a_traceback(sensor):
    service, info, _ = sensor
    key = run_split(service, info.to_store())["split_key"]
    for bad in (float("inf"), float("nan"), "three"):
        with pytest.raises(DegreescopeError, match="whole number from 0 to 20"):
            degree.on_degree(service, bad, key)
        with pytest.raises(DegreescopeError, match="whole number"):
            run_split(service, info.to_store(), degree=bad)
    assert run_split(service, info.to_store(), degree=99)["degree"] == 20  # out of range: the nearest degree


def test_refused_folds_and_seed_are_named_in_the_split_note(sensor):
    service, info, _ = sensor
    for folds, used in ((1, 2), (100, 50)):
        note = split.on_mode("kfold", None, 25, folds, 0)["note"]
        assert f"Folds '{folds}' was not used" in note and f"{used} is in force" in note
        assert run_split(service, info.to_store(), mode="kfold", folds=folds)["split_key"]["folds"] == used
    note = split.on_mode("holdout", None, 25, 10, -5)["note"]
    assert "Seed '-5' was not used" in note and "0 is in force" in note
    assert run_split(service, info.to_store(), seed=-5)["split_key"]["seed"] == 0
    assert "was not used" not in split.on_mode("kfold", None, 25, 10, 0)["note"]
    assert split.on_new_split(1, -5)["seed"] == 1


def test_a_huge_typed_text_is_refused_before_it_is_split(monkeypatch):
    import app.service as service_module

    calls = []
    real_split = service_module.re.split
    monkeypatch.setattr(service_module.re, "split", lambda *a, **k: calls.append(1) or real_split(*a, **k))
    huge = "1 " * (25 * 2**20)  # 50 MiB, 25 million values
    with pytest.raises(DegreescopeError, match="Type at most 1000 x values"):
        parse_x_values(huge)
    assert calls == []  # refused on its length, never split
    with pytest.raises(DegreescopeError) as err:
        parse_x_values("1, " + "x" * 5000)
    assert len(str(err.value)) < 200 and "…" in str(err.value)  # the echoed text is cut
    np.testing.assert_array_equal(parse_x_values("250,5\n3;4", decimal=","), [250.5, 3, 4])


def test_oversize_upload_message(sample_dir):
    from app.service import FitService
    from app.store import DatasetStore

    small = FitService(DatasetStore(), upload_limit_bytes=2000)
    dash_app = app.create_app(upload_limit_bytes=2000)
    out = dash_call(dash_app, "dataset.data", {"upload.contents": data_url("x,y\n" + "1,2\n" * 1000)})
    assert list(out["response"]) == [ids.UPLOAD_NOTICE]  # the dataset on screen stays
    assert "over this server's upload limit" in json.dumps(out["response"][ids.UPLOAD_NOTICE])
    with pytest.raises(DegreescopeError, match="over this server's upload limit"):
        data.on_upload(small, data_url("x,y\n" + "1,2\n" * 1000), "big.csv")


def test_exports(sensor):
    service, info, cols = sensor
    key = run_split(service, info.to_store())["split_key"]
    file = downloads.on_export(service, "model", key, 3, ["confidence"], "")["download"]
    assert file["filename"].endswith(".model.json") and '"degree": 3' in file["content"]
    file = downloads.on_export(service, "csv", key, 3, [], "500, 3000")["download"]
    assert file["content"].count("\n") == 3
    file = downloads.on_export(service, "csv", key, 3, [], "")["download"]
    assert file["content"].count("\n") == 121  # every data row
    file = downloads.on_export(service, "report", key, 3, ["confidence"], "")["download"]
    assert file["filename"].endswith(".report.html") and file["content"].startswith("<!DOCTYPE html>")


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
    key = run_split(service, info.to_store(), mode="kfold")["split_key"]
    text = ", ".join(str(500 + i) for i in range(600))
    out = predict.on_predict(service, text, key, 2)["table"]
    flat = str(out.to_plotly_json())
    assert "first 50 of 600" in flat
    table = out.children[0]
    assert len(table.children[1].children) == PREDICT_ROWS_SHOWN
    file = downloads.on_export(service, "csv", key, 2, [], text)["download"]
    assert file["content"].count("\n") == 601  # header + every typed value


def test_the_page_and_the_report_show_the_same_caution():
    from app import exports, text

    assert text.CAUTION_TEXT == exports.CAUTION_TEXT
    page = app.create_app().layout()
    caution = next(c for c in page._traverse() if getattr(c, "id", None) == "caution")
    assert text.CAUTION_TEXT in str(caution.to_plotly_json())
