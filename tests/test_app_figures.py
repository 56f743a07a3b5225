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
    pts = figures.points_figure(view).data
    train, test = pts[ids.POINTS_TRACE_TRAIN], pts[ids.POINTS_TRACE_TEST]
    assert train.name == "training" and test.name.startswith("test")
    assert train.marker.symbol != test.marker.symbol and train.marker.color != test.marker.color
    assert len(train.x) + len(test.x) == 120
    fig = figures.fit_figure(view, dv, ["confidence"])
    d = fig.data
    assert len(d) == 5  # the curve layer holds no rows
    np.testing.assert_allclose(d[ids.FIT_TRACE_CURVE].y, dv.curve)
    assert d[ids.FIT_TRACE_CONF_HI].visible is True and d[ids.FIT_TRACE_PRED_HI].visible is False
    assert "(mV)" in fig.layout.xaxis.title.text and "(°C)" in fig.layout.yaxis.title.text
    assert fig.layout.annotations[0].text.startswith("Degree 3 · test RMSE")


def test_the_two_layers_share_their_geometry_and_the_curve_layer_is_transparent(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(), 3)
    pts, fit = figures.points_figure(view).layout, figures.fit_figure(view, dv).layout
    assert pts.margin == fit.margin and fit.margin.autoexpand is False
    assert tuple(pts.xaxis.range) == tuple(fit.xaxis.range) and tuple(pts.yaxis.range) == tuple(fit.yaxis.range)
    assert fit.paper_bgcolor == "rgba(0,0,0,0)" and fit.plot_bgcolor == "rgba(0,0,0,0)"
    both = figures.fit_chart_layers(view, dv)
    assert len(both.data) == 2 + 5 and both.layout.plot_bgcolor == "#ffffff"


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


def test_degree_frames_hold_every_degree_as_the_figure_draws_it(sensor):
    # what the browser copies into the curve layer on a key press is the server's own curve and bands
    from app import layers

    service, info, cols = sensor
    split = SplitSettings()
    view = service.split_view(info.id, cols, split)
    frames = layers.degree_frames(service, info.id, cols, split, view)
    assert frames["max"] == view.max_degree and len(frames["frames"]) == view.max_degree + 1

    def unpack(spec):
        import base64

        assert spec["dtype"] == "f4"
        return np.frombuffer(base64.b64decode(spec["bdata"]), dtype=np.float32)

    for d in (0, 3, view.max_degree):
        dv = service.degree_view(info.id, cols, split, d)
        f = frames["frames"][str(d)]
        np.testing.assert_allclose(unpack(f["curve"]), dv.curve, rtol=1e-6)
        np.testing.assert_allclose(unpack(f["pred_hi"]), dv.pred_hi, rtol=1e-6)
        assert f["title"] == figures.fit_figure(view, dv).layout.title.text
        assert f["fit_caption"] == figures.fit_figure(view, dv).layout.annotations[0].text
        assert f["caption"] == figures.error_figure(view, dv).layout.annotations[0].text
    assert len(plotly.io.json.to_json_plotly(frames)) < 300_000  # curves on a grid, not the rows


def test_error_chart_marks_current_and_recommended_degree(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(mode="kfold"), 6)
    fig = figures.error_figure(view, dv)
    ring = fig.data[ids.ERR_TRACE_CURRENT]  # a round marker on the log axis
    assert (list(ring.x), list(ring.y), ring.marker.symbol) == ([6], [dv.test_rmse], "circle-open")
    assert fig.layout.shapes[0].x0 == 6 - 0.4 and fig.layout.shapes[0].x1 == 6 + 0.4  # the column
    assert list(fig.data[ids.ERR_TRACE_RECOMMENDED].x) == [view.steady.recommended_degree]
    assert fig.data[ids.ERR_TRACE_TEST].error_y.visible is True  # SE across folds
    np.testing.assert_allclose(fig.data[ids.ERR_TRACE_TEST].error_y.array, view.sweep.test_rmse_se)
    assert fig.layout.yaxis.type == "log"
    holdout = figures.error_figure(*views(service, info, cols, SplitSettings(), 6))
    assert holdout.data[ids.ERR_TRACE_TEST].error_y.visible is False  # one holdout has no SE


def test_many_rows_are_drawn_as_a_density_that_counts_every_row(fit_service):
    from app.service import DENSITY_FROM

    rng = np.random.default_rng(0)
    x = rng.uniform(0, 1, 30_000)  # more than the 20,000-point sample: the density counts every row
    text = "a,b\n" + "\n".join(f"{v:.6f},{2 * v + rng.normal(0, 0.1):.6f}" for v in x)
    info = fit_service.load_bytes(text.encode(), "many.csv")
    view, dv = views(fit_service, info, Columns("a", "b"), SplitSettings(), 1)
    assert view.rows_used > DENSITY_FROM and view.dense
    pts = figures.points_figure(view).data
    train, test = pts[ids.POINTS_TRACE_TRAIN], pts[ids.POINTS_TRACE_TEST]
    assert isinstance(train, go.Heatmap) and isinstance(test, go.Heatmap)
    assert train.showlegend and test.showlegend and train.colorscale != test.colorscale
    assert np.sum(train.customdata) + np.sum(test.customdata) == 30_000
    assert np.sum(test.customdata) == np.sum(view.sweep.test_mask)
    note = figures.fit_figure(view, dv).layout.annotations[0].text
    assert "30,000 rows as a density: 120 × 80 bins" in note
    few = fit_service.load_bytes(("a,b\n" + "\n".join(f"{i},{i * 2}" for i in range(50))).encode(), "few.csv")
    small, _ = views(fit_service, few, Columns("a", "b"), SplitSettings(), 1)
    assert not small.dense and isinstance(figures.points_figure(small).data[0], go.Scatter)


def test_the_error_axis_shows_numbers_when_the_rmse_spans_under_a_decade(sensor):
    service, info, cols = sensor
    view, dv = views(service, info, cols, SplitSettings(mode="kfold"), 3)
    y = figures.error_figure(view, dv).layout.yaxis
    lo, hi = np.nanmin(view.sweep.test_rmse), np.nanmax(view.sweep.test_rmse)
    if y.tickmode == "array":
        inside = [v for v in y.tickvals if lo <= v <= hi]
        assert len(inside) >= 2 and all(t for t in y.ticktext)
        # beside listed ticks, plotly's automatic minor grid on a log axis can run to countless lines
        assert not y.minor.showgrid and not y.minor.ticks
    narrow = figures.log_ticks(_rmse_only(0.051, 0.058))
    assert narrow["tickmode"] == "array" and sum(0.051 <= v <= 0.058 for v in narrow["tickvals"]) >= 3
    assert figures.log_ticks(_rmse_only(1e-3, 50)) == {"dtick": 1}


def _rmse_only(lo, hi):
    from types import SimpleNamespace

    sweep = SimpleNamespace(train_rmse=np.array([lo]), test_rmse=np.array([hi]))
    return SimpleNamespace(sweep=sweep, steady=SimpleNamespace(test_rmse=np.array([np.nan])))


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
    assert list(figures.error_figure(view, missing).data[ids.ERR_TRACE_CURRENT].y) == [None]
    assert "test RMSE —" in figures.fit_figure(view, missing).layout.annotations[0].text
