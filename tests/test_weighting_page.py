"""The page's one weighting: the named rule picked under the weights column drives every fit on the page.

References, named beside each check:
* statsmodels WLS (``sm.WLS(...).fit()``): coefficients, standard errors, confidence intervals of the
  coefficients (``conf_int``), and ``get_prediction(exog, weights=w0).summary_frame(alpha)`` for the
  confidence band of the mean and the prediction band of one new reading, whose variance statsmodels
  takes as s²/w(x0) when given the weight of the new point.
* statsmodels OLS for the unweighted comparisons.
* The data are invented (an assay whose spread grows with the concentration), made here with a fixed seed.
"""

from __future__ import annotations

import csv
import io
import json
from dataclasses import replace

import numpy as np
import pytest
import statsmodels.api as sm
from test_app_callbacks import dash_call, split_values

import app
import fitting
from app import edge, ids, text, views_model
from app.panels import charts, data, downloads, model, predict, standards
from app.panels.settings import from_key, parse_query, split_key, url_query
from app.service import Columns
from fitting import FitError


def assay(blank: bool = False, seed: int = 11) -> tuple[np.ndarray, np.ndarray]:
    """Invented assay: three replicates at seven concentrations, spread proportional to the concentration."""
    rng = np.random.default_rng(seed)
    x = np.repeat([1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0], 3)
    y = 0.05 + 0.1 * x + 0.0002 * x**2 + rng.normal(0.0, 0.02, x.size) * x
    if blank:  # a blank (x = 0) on the file's line 2
        x, y = np.concatenate([[0.0], x]), np.concatenate([[0.04], y])
    return x, y


def csv_bytes(x, y) -> bytes:
    rows = "".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(x, y, strict=True))
    return ("concentration (ng/mL),area\n" + rows).encode()


def load(service, x, y, name="assay.csv") -> dict:
    return service.load_bytes(csv_bytes(x, y), name).to_store()


def split_out(service, store, weighting=None, mode="kfold", **kw) -> dict:
    args = dict(dataset=store, x=store["x"], y=store["y"], weights=None, group=None, mode=mode, holdout=25)
    args.update(folds=5, seed=0, degree=None, bands=["confidence", "prediction"], weighting=weighting)
    args.update(kw)
    return charts.on_split(service, **args)


def wls(x, y, degree, w):
    """statsmodels WLS of y on 1, x, ..., x^degree (OLS when ``w`` is None)."""
    design = np.vander(np.asarray(x, dtype=float), degree + 1, increasing=True)
    return (sm.OLS(y, design) if w is None else sm.WLS(y, design, weights=w)).fit()


def frame(res, x0, degree, w0=None, alpha=0.05):
    """statsmodels' prediction frame at x0 (``weights=w0``: the variance of a new reading is s²/w0)."""
    design = np.vander(np.asarray(x0, dtype=float), degree + 1, increasing=True)
    return res.get_prediction(design, weights=w0).summary_frame(alpha=alpha)


# ----------------------------------------------------------------------------
# the engine: the display fit's prediction band with the weight at each x


@pytest.mark.parametrize("level", [0.95, 0.9])
def test_sweep_band_with_a_weight_at_each_x_matches_statsmodels_wls(level):
    """DegreeSweep.band(..., weight=w(x0)) against statsmodels WLS get_prediction with weights=w(x0)."""
    x, y = assay()
    w = 1.0 / x**2
    sweep = fitting.sweep_degrees(x, y, degrees=range(0, 4), folds=5, weights=w)  # display fit: every row
    x0 = np.linspace(0.5, 110.0, 37)
    w0 = 1.0 / x0**2
    ref = frame(wls(x, y, 2, w), x0, 2, w0, alpha=1 - level)  # statsmodels WLS
    scale = float(np.max(np.abs(y)))
    lo, hi = sweep.band(2, x0, "prediction", level, weight=w0)
    np.testing.assert_allclose(lo, ref["obs_ci_lower"], rtol=1e-9, atol=1e-11 * scale)
    np.testing.assert_allclose(hi, ref["obs_ci_upper"], rtol=1e-9, atol=1e-11 * scale)
    clo, chi = sweep.band(2, x0, "confidence", level, weight=w0)  # the weight of a new reading plays no part
    np.testing.assert_allclose(clo, ref["mean_ci_lower"], rtol=1e-9, atol=1e-11 * scale)
    np.testing.assert_allclose(chi, ref["mean_ci_upper"], rtol=1e-9, atol=1e-11 * scale)
    plain = frame(wls(x, y, 2, w), x0, 2, None, alpha=1 - level)  # no weight: a new reading has weight 1
    np.testing.assert_allclose(sweep.band(2, x0, "prediction", level)[1], plain["obs_ci_upper"], rtol=1e-9)


def test_sweep_band_of_a_holdout_uses_its_training_rows_and_gaps_where_the_weight_is_undefined():
    """Holdout: the display fit is the training rows' (statsmodels WLS on them); a NaN weight gives a gap."""
    x, y = assay()
    w = 1.0 / x
    sweep = fitting.sweep_degrees(x, y, degrees=range(0, 4), holdout=0.25, seed=3, weights=w)
    keep = ~sweep.test_mask
    x0 = np.array([1.5, 7.0, 42.0, 99.0])
    ref = frame(wls(x[keep], y[keep], 1, w[keep]), x0, 1, 1.0 / x0)  # statsmodels WLS, training rows
    lo, hi = sweep.band(1, x0, "prediction", 0.95, weight=1.0 / x0)
    np.testing.assert_allclose(lo, ref["obs_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(hi, ref["obs_ci_upper"], rtol=1e-9)
    lo, hi = sweep.band(1, x0, "prediction", 0.95, weight=np.array([np.nan, 1.0, 0.0, -1.0]))
    assert np.isnan(lo[[0, 2, 3]]).all() and np.isnan(hi[[0, 2, 3]]).all() and np.isfinite(lo[1])


# ----------------------------------------------------------------------------
# the callbacks: a named rule weights the sweeps, the verdict, the chart and the caption


def test_a_named_rule_weights_the_sweeps_the_verdict_and_the_chart(fit_service):
    x, y = assay()
    store = load(fit_service, x, y)
    out = split_out(fit_service, store, weighting="1/x2", degree=2)
    key = out["split_key"]
    assert key["weighting"] == "1/x2"
    ds, cols, split = from_key(key)
    assert cols.weighting == "1/x2"
    view = fit_service.split_view(ds, cols, split)
    # the verdict: the engine's one rule with the rule's weights (w = 1/x²)
    steady = fitting.verdict_sweep(x, y, weights=1.0 / x**2)
    np.testing.assert_allclose(view.steady.test_rmse, steady.test_rmse, rtol=1e-12, equal_nan=True)
    assert view.recommended_degree == steady.recommended_degree
    assert out["recommended_degree"] == text.recommended(view)
    plain = fit_service.split_view(ds, replace(cols, weighting="none"), split)
    assert not np.allclose(view.sweep.test_rmse[:4], plain.sweep.test_rmse[:4])  # the weights changed something
    # the chart (k-fold: the drawn curve is the fit on every row) against statsmodels WLS
    dv = fit_service.degree_view(ds, cols, split, 2)
    res = wls(x, y, 2, 1.0 / x**2)
    grid = view.grid
    np.testing.assert_allclose(dv.curve, res.predict(np.vander(grid, 3, increasing=True)), rtol=1e-9)
    ok = grid != 0  # the rule is undefined at x = 0
    ref = frame(res, grid[ok], 2, 1.0 / grid[ok] ** 2)  # statsmodels WLS, s²/w(x0) for a new reading
    np.testing.assert_allclose(dv.pred_lo[ok], ref["obs_ci_lower"], rtol=1e-8)
    np.testing.assert_allclose(dv.pred_hi[ok], ref["obs_ci_upper"], rtol=1e-8)
    np.testing.assert_allclose(dv.conf_hi[ok], ref["mean_ci_upper"], rtol=1e-8)
    # the words: a weighted RMSE, and the rule named under the charts and in the verdict panel
    first, second = text.degree_caption(view, dv)
    assert "weighted CV test RMSE" in first and "weighting 1/x²" in second
    assert "weighting 1/x²" in out["measure_note"]
    plain_dv = fit_service.degree_view(ds, replace(cols, weighting="none"), split, 2)
    first, second = text.degree_caption(plain, plain_dv)
    assert "weighted" not in first and "weighting" not in second


def test_the_hand_over_model_and_its_model_json_record_the_rule(fit_service):
    """The dashboard's Model JSON (app/handover): weighting "1/x", coefficients and SEs as statsmodels WLS;
    the predictions CSV's prediction interval at a typed x uses s²/w(x0) (statsmodels get_prediction)."""
    x, y = assay()
    key = split_out(fit_service, load(fit_service, x, y), weighting="1/x", mode="holdout")["split_key"]
    file = downloads.on_export(fit_service, "model", key, 2, ["confidence"], "")["download"]
    doc = json.loads(file["content"])
    res = wls(x, y, 2, 1.0 / x)  # every usable row, whatever split the charts show
    assert doc["weighting"] == "1/x" and doc["weighted"] is True and doc["rows_used"] == x.size
    np.testing.assert_allclose(doc["coefficients"], res.params, rtol=1e-9)
    np.testing.assert_allclose(doc["standard_errors"], res.bse, rtol=1e-8)
    assert doc["fitted_from"]["weights"] is None  # no weights column: the rule is the model's own
    typed = "3, 30, 80, 95"  # four values: statsmodels refuses new weights as many as the coefficients
    rows = list(
        csv.reader(io.StringIO(downloads.on_export(fit_service, "csv", key, 2, [], typed)["download"]["content"]))
    )
    body = np.array([[float(v) for v in r[:6]] for r in rows[1:]])
    x0 = np.array([3.0, 30.0, 80.0, 95.0])
    ref = frame(res, x0, 2, 1.0 / x0)
    np.testing.assert_allclose(body[:, 4], ref["obs_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(body[:, 5], ref["obs_ci_upper"], rtol=1e-9)
    card = model.on_model(fit_service, key, 2)
    assert "weighted RMSE" in str(card["stats"].to_plotly_json())
    assert "the rule 1/x gives there" in card["note"]


def test_a_weights_column_keeps_its_own_weights_and_refuses_a_rule_as_well(fit_service):
    x, y = assay()
    w = 1.0 / x**2
    raw = "concentration,area,w\n" + "".join(
        f"{float(a)!r},{float(b)!r},{float(c)!r}\n" for a, b, c in zip(x, y, w, strict=True)
    )
    store = fit_service.load_bytes(raw.encode(), "w.csv").to_store()
    key = split_out(fit_service, store, weights="w", degree=2)["split_key"]
    ds, cols, _ = from_key(key)
    fit = views_model.handover_fit(fit_service, ds, cols, 2)
    assert fit.weighting == "column" and np.allclose(fit.coefficients, wls(x, y, 2, w).params, rtol=1e-9)
    with pytest.raises(FitError, match="weights column 'w' is chosen"):
        split_out(fit_service, store, weights="w", weighting="1/x")


# ----------------------------------------------------------------------------
# rows where the rule is undefined, through the page


def test_rows_undefined_under_1_over_x_are_named_in_the_page_notice(tmp_path):
    """Through Dash itself: the blank (x = 0, line 2 of the file) under 1/x: the fit chart's notice names
    the line, and every other output keeps its value."""
    x, y = assay(blank=True)
    path = tmp_path / "assay_with_blank.csv"
    path.write_bytes(csv_bytes(x, y))
    dash_app = app.create_app(str(path))
    store = next(c for c in dash_app.layout()._traverse() if getattr(c, "id", None) == ids.DATASET).data
    out = dash_call(dash_app, "fit-points.figure", split_values(store, **{"weighting.value": "1/x"}))
    assert list(out["response"]) == [ids.FIT_NOTICE]
    notice = json.dumps(out["response"][ids.FIT_NOTICE], ensure_ascii=False)
    assert "Weighting 1/x is undefined where x = 0: 1 line (line 2)" in notice
    fine = dash_call(dash_app, "fit-points.figure", split_values(store, **{"weighting.value": "1/y"}))
    assert ids.FIT_CHART in fine["response"]  # 1/y is defined on every row (all responses above 0)
    bad = dash_call(dash_app, "fit-points.figure", split_values(store, **{"weighting.value": "1/z"}))
    assert list(bad["response"]) == [ids.FIT_NOTICE] and "Unknown weighting" in json.dumps(bad["response"])


# ----------------------------------------------------------------------------
# the address, the settings record and the picker


def test_the_address_round_trips_the_weighting(fit_service):
    x, y = assay()
    store = load(fit_service, x, y)
    key = split_key(store, store["x"], store["y"], None, None, "kfold", 25, 5, 0, (), "1/x2")
    search = url_query(key, 2)
    assert parse_query(search)["wt"] == "1/x2"
    out = data.on_dataset(fit_service, store, search)
    assert out["weighting"] == "1/x2" and out["degree"] == 2
    assert out["seen"][-1] == "1/x2"  # the degree from the address stays while the weighting does
    again = split_out(fit_service, store, weighting=out["weighting"], degree=out["degree"])["split_key"]
    assert again == key
    assert "wt" not in parse_query(url_query(dict(key, weighting="none"), 2))
    assert "wt" not in parse_query(url_query({k: v for k, v in key.items() if k != "weighting"}, 2))
    for odd in ("1%2Fz", "", "none", "1%2Fx%5E2"):
        assert data.on_dataset(fit_service, store, search.replace("wt=1%2Fx2", f"wt={odd}"))["weighting"] == "none"
    assert data.on_dataset(fit_service, store, "")["weighting"] == "none"
    with pytest.raises(FitError, match="Unknown weighting"):
        split_key(store, store["x"], store["y"], None, None, "kfold", 25, 5, 0, (), "1/z")


def test_a_new_weighting_moves_the_degree_to_its_recommendation(fit_service):
    x, y = assay()
    store = load(fit_service, x, y)
    first = split_out(fit_service, store, degree=5, seen=None)["seen"]
    kept = split_out(fit_service, store, degree=5, seen=first)
    assert kept["degree"] is data.no_update  # same columns and weighting: a degree set by hand stays
    moved = split_out(fit_service, store, weighting="1/x", degree=5, seen=first)
    assert moved["seen"][-1] == "1/x" and moved["seen"] != first
    assert moved["degree"] == int(moved["recommended_degree"].split()[-1])


def test_the_settings_record_and_the_picker_at_the_edge():
    base = {"dataset": "d", "x": "x", "y": "y", "mode": "kfold", "holdout": 0.25, "folds": 5, "seed": 0}
    entry = {"inputs": [{"id": ids.SPLIT_KEY, "property": "data", "value": dict(base, weighting="1/x")}]}
    assert edge.check_callback_body(entry) is None
    entry["inputs"][0]["value"] = dict(base, weighting=2)
    assert "split-key.data ['weighting']" in edge.check_callback_body(entry)
    assert from_key(base)[1] == Columns("x", "y")  # a record without the field: no weighting


def test_the_picker_sits_under_the_weights_column_and_nowhere_else():
    page = app.create_app().layout()
    found = [c for c in page._traverse() if getattr(c, "id", None) == ids.WEIGHTING]
    assert len(found) == 1 and found[0].value == "none" and not found[0].clearable
    assert [o["value"] for o in found[0].options] == list(fitting.WEIGHTINGS)
    columns = next(
        c for c in page._traverse() if getattr(c, "children", None) and ids.WEIGHTS_COLUMN in _ids(c.children)
    )
    order = _ids(columns.children)
    assert order.index(ids.WEIGHTING) == order.index(ids.WEIGHTS_COLUMN) + 2  # its label between them
    labels = [c for c in columns.children if getattr(c, "htmlFor", None) == ids.WEIGHTING]
    assert labels and labels[0].children == text.WEIGHTING_LABEL
    assert ids.WEIGHTING not in _ids(standards.layout(None).children)
    assert "weighting" in charts.INPUTS and "weighting" not in standards.INPUTS


def _ids(children) -> list:
    return [getattr(c, "id", None) for c in (children if isinstance(children, list) else [children])]


def test_the_standards_comparison_marks_the_rule_in_force(fit_service):
    x, y = assay()
    key = split_out(fit_service, load(fit_service, x, y), weighting="1/y2", degree=1)["split_key"]
    out = standards.on_standards(fit_service, 15, 20, key, 1)
    in_use = [r for r in out["comparison"][0].children[1].children if "(in use)" in str(r.to_plotly_json())]
    assert len(in_use) == 1 and fitting.WEIGHTINGS["1/y2"] in str(in_use[0].to_plotly_json())
    assert "weighting: 1/y²" in out["note"].children


# ----------------------------------------------------------------------------
# the page's interval level: the prediction table and the model card follow it


def test_the_prediction_table_follows_the_page_level(fit_service):
    """90 % from the page's level store: statsmodels WLS get_prediction(alpha=0.10); empty store: 95 %."""
    x, y = assay()
    key = split_out(fit_service, load(fit_service, x, y), weighting="1/x")["split_key"]
    ds, cols, split = from_key(key)
    x0 = np.array([4.0, 60.0])
    p = views_model.handover_predict(fit_service, ds, cols, split, 2, x0, 0.9)
    ref = frame(wls(x, y, 2, 1.0 / x), x0, 2, 1.0 / x0, alpha=0.10)  # statsmodels WLS
    np.testing.assert_allclose(p.pred_lo, ref["obs_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(p.conf_hi, ref["mean_ci_upper"], rtol=1e-9)
    ninety = predict.on_predict(fit_service, "4, 60", key, 2, 90)["table"]
    default = predict.on_predict(fit_service, "4, 60", key, 2, None)["table"]
    flat90, flat95 = (str(t.to_plotly_json()) for t in (ninety, default))
    assert "90 % confidence" in flat90 and "90 % prediction" in flat90 and "95 %" not in flat90
    assert "95 % confidence" in flat95 and "95 % prediction" in flat95
    assert flat90 != flat95.replace("95 %", "90 %")  # the intervals moved, not only the header
    assert "95 % confidence" in str(predict.on_predict(fit_service, "4", key, 2, 120)["table"].to_plotly_json())


def test_the_model_card_intervals_follow_the_page_level(fit_service):
    """Coefficient intervals at 99 %: statsmodels WLS conf_int(alpha=0.01); a level change alone keeps the URL."""
    x, y = assay()
    key = split_out(fit_service, load(fit_service, x, y), weighting="1/x2")["split_key"]
    ds, cols, split = from_key(key)
    card = views_model.handover_model(fit_service, ds, cols, split, 2, 0.99)
    ci = wls(x, y, 2, 1.0 / x**2).conf_int(alpha=0.01)  # statsmodels WLS
    np.testing.assert_allclose([r["ci_lo"] for r in card.coefficient_rows], ci[:, 0], rtol=1e-8)
    np.testing.assert_allclose([r["ci_hi"] for r in card.coefficient_rows], ci[:, 1], rtol=1e-8)
    out = model.on_model(fit_service, key, 2, None, 99)
    assert "99 % CI" in str(out["coefficients"].to_plotly_json()) and "99 % intervals" in out["note"]
    assert "95 % CI" in str(model.on_model(fit_service, key, 2)["coefficients"].to_plotly_json())
    only = model.on_model(fit_service, key, 2, None, 90, level_only=True)
    assert only["search"] is model.no_update and only["residual_figure"] is model.no_update
    assert "90 % CI" in str(only["coefficients"].to_plotly_json())


def test_a_blank_left_out_on_purpose_lets_1_over_x_be_used(fit_service):
    """The message's way out: the blank (line 2) left out by the analyst; the fit is statsmodels WLS on the rest."""
    x, y = assay(blank=True)
    store = load(fit_service, x, y)
    with pytest.raises(FitError, match=r"\(line 2\)"):
        split_out(fit_service, store, weighting="1/x")
    left_out = {"dataset": store["id"], "rows": [{"line": 2, "reason": "blank"}]}
    key = split_out(fit_service, store, weighting="1/x", exclusions=left_out)["split_key"]
    assert key["excluded"] == [2]
    ds, cols, _ = from_key(key)
    fit = views_model.handover_fit(fit_service, ds, cols, 2)
    np.testing.assert_allclose(fit.coefficients, wls(x[1:], y[1:], 2, 1.0 / x[1:]).params, rtol=1e-9)  # statsmodels
