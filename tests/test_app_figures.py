"""Figure builders as plain functions: trace order, markers, extrapolation zones, partial updates."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go
import plotly.io.json

from app import figures, ids
from app.service import Columns, SplitSettings


def views(service, info, cols, split, degree):
    view = service.split_view(info.id, cols, split)
    return view, service.degree_view(info.id, cols, split, degree)


def test_fit_chart_has_distinct_training_and_test_points_curve_and_bands(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(), 3)
    fig = figures.fit_figure(view, dv, ["confidence"])
    d = fig.data
    assert d[ids.FIT_TRACE_TRAIN].name == "training" and d[ids.FIT_TRACE_TEST].name.startswith("test")
    assert d[ids.FIT_TRACE_TRAIN].marker.symbol != d[ids.FIT_TRACE_TEST].marker.symbol
    assert d[ids.FIT_TRACE_TRAIN].marker.color != d[ids.FIT_TRACE_TEST].marker.color
    assert len(d[ids.FIT_TRACE_TRAIN].x) + len(d[ids.FIT_TRACE_TEST].x) == 120
    np.testing.assert_allclose(d[ids.FIT_TRACE_CURVE].y, dv.curve)
    assert d[ids.FIT_TRACE_CONF_HI].visible is True and d[ids.FIT_TRACE_PRED_HI].visible is False
    assert "(mV)" in fig.layout.xaxis.title.text and "(°C)" in fig.layout.yaxis.title.text
    assert fig.layout.annotations[0].text.startswith("Degree 3 · test RMSE")


def test_extrapolation_zones_lie_outside_the_training_range(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(mode="ordered", holdout=0.3), 2)
    fig = figures.fit_figure(view, dv)
    lo, hi = view.training_range
    rects = [s for s in fig.layout.shapes if s.type == "rect"]
    assert len(rects) == 2
    assert rects[0].x1 == lo and rects[1].x0 == hi
    assert view.test_x.min() > hi  # ordered holdout: every test point is in the shaded zone
    assert sum(a.text == "extrapolation" for a in fig.layout.annotations) == 2


def test_degree_patch_touches_curve_bands_and_caption_but_not_the_points(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(), 7)
    patch = figures.fit_degree_patch(view, dv, ["prediction"])
    ops = patch.to_plotly_json()["operations"]
    touched = {tuple(op["location"][:2]) for op in ops if op["location"][0] == "data"}
    assert ("data", ids.FIT_TRACE_TRAIN) not in touched and ("data", ids.FIT_TRACE_TEST) not in touched
    assert ("data", ids.FIT_TRACE_CURVE) in touched
    curve_op = next(op for op in ops if op["location"] == ["data", ids.FIT_TRACE_CURVE, "y"])
    np.testing.assert_allclose(curve_op["params"]["value"], dv.curve, rtol=1e-6)
    vis = {op["location"][1]: op["params"]["value"] for op in ops if op["location"][-1] == "visible"}
    assert vis[ids.FIT_TRACE_PRED_HI] is True and vis[ids.FIT_TRACE_CONF_HI] is False
    # the hidden confidence band is not resent; the shown prediction band is
    assert ("data", ids.FIT_TRACE_CONF_HI) not in {tuple(op["location"][:2]) for op in ops if op["location"][-1] == "y"}
    assert ("data", ids.FIT_TRACE_PRED_HI) in {tuple(op["location"][:2]) for op in ops if op["location"][-1] == "y"}
    assert len(plotly.io.json.to_json_plotly(patch.to_plotly_json())) < 30_000  # a few hundred points, not the data


def test_error_chart_marks_current_and_recommended_degree(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(mode="kfold"), 6)
    fig = figures.error_figure(view, dv)
    assert list(fig.data[ids.ERR_TRACE_CURRENT].x) == [6]
    assert list(fig.data[ids.ERR_TRACE_RECOMMENDED].x) == [view.steady.recommended_degree]
    assert fig.data[ids.ERR_TRACE_TEST].error_y.visible is True  # SE across folds
    np.testing.assert_allclose(fig.data[ids.ERR_TRACE_TEST].error_y.array, view.sweep.test_rmse_se)
    assert fig.layout.yaxis.type == "log"
    p = figures.error_degree_patch(view, service.degree_view(info.id, cols, SplitSettings(mode="kfold"), 2))
    ops = {tuple(o["location"]): o["params"]["value"] for o in p.to_plotly_json()["operations"]}
    assert ops[("data", ids.ERR_TRACE_CURRENT, "x")] == [2]
    holdout = figures.error_figure(*views(service, info, cols, SplitSettings(), 6))
    assert holdout.data[ids.ERR_TRACE_TEST].error_y.visible is False  # one holdout has no SE


def test_many_points_use_webgl(fit_service):
    rng = np.random.default_rng(0)
    x = rng.uniform(0, 1, 8000)
    text = "a,b\n" + "\n".join(f"{v:.6f},{2 * v + rng.normal(0, 0.1):.6f}" for v in x)
    info = fit_service.load_bytes(text.encode(), "many.csv")
    view, dv = views(fit_service, info, Columns("a", "b"), SplitSettings(), 1)
    fig = figures.fit_figure(view, dv)
    assert isinstance(fig.data[ids.FIT_TRACE_TRAIN], go.Scattergl)


def test_names_from_the_file_cannot_act_as_markup(fit_service):
    text = "<img src=x onerror=alert(1)>,<b>y</b>\n1,2\n2,4.1\n3,6.2\n4,7.9\n5,10.1\n6,12.2\n"
    info = fit_service.load_bytes(text.encode(), "evil.csv")
    view, dv = views(fit_service, info, Columns(info.default_x, info.default_y), SplitSettings(), 1)
    fig = figures.fit_figure(view, dv)
    assert fig.layout.xaxis.title.text == "&lt;img src=x onerror=alert(1)&gt;"
    assert "<b>" not in fig.layout.title.text and "&lt;b&gt;y&lt;/b&gt;" in fig.layout.title.text


def test_residual_chart(sensor):
    service, info, cols = sensor
    view = service.split_view(info.id, cols, SplitSettings())
    model = service.model_view(info.id, cols, SplitSettings(), 1)
    fig = figures.residual_figure(view, model)
    res = np.concatenate([fig.data[0].y, fig.data[1].y])
    x = np.concatenate([view.train_x, view.test_x])
    y = np.concatenate([view.train_y, view.test_y])
    np.testing.assert_allclose(res, y - model.fit.predict(x))


def test_a_missing_test_rmse_is_a_gap_on_the_error_chart_not_the_minimum(sensor):
    # the current-degree marker sits on the degree view's own number; a NaN there is drawn as a gap
    import dataclasses

    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(mode="kfold"), 4)
    fig = figures.error_figure(view, dv)
    assert list(fig.data[ids.ERR_TRACE_CURRENT].y) == [dv.test_rmse]
    rec = view.recommended_degree
    assert list(fig.data[ids.ERR_TRACE_RECOMMENDED].y) == [view.steady.test_rmse[view.steady.index(rec)]]
    missing = dataclasses.replace(dv, test_rmse=float("nan"))
    ops = {
        tuple(o["location"]): o["params"]["value"]
        for o in figures.error_degree_patch(view, missing).to_plotly_json()["operations"]
    }
    assert ops[("data", ids.ERR_TRACE_CURRENT, "y")] == [None]
    assert figures.error_figure(view, missing).data[ids.ERR_TRACE_CURRENT].y == (None,)
    assert "test RMSE —" in figures.fit_figure(view, missing).layout.annotations[0].text
