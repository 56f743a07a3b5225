"""Pure figure builders: plain views in, ``go.Figure`` (or a ``dash.Patch``) out.

Trace order is fixed (see ``ids.FIT_TRACE_*`` / ``ids.ERR_TRACE_*``) so that a degree
change can send a partial update of the curve, the bands and the highlight and
leave the point traces alone.

Colours are a palette of our own, chosen to stay apart under the common forms of
colour blindness (blue against amber), and every pair that matters also differs in
shape: training points are filled circles, test points open diamonds.
"""

from __future__ import annotations

import html

import numpy as np
import plotly.graph_objects as go
from dash import Patch

from . import ids, text
from .service import DegreeView, ModelView, SplitView

INK = "#1c2a35"
GRID = "#e3e0d8"
PAPER = "#fffdf8"
TRAIN = "#2a5d8f"  # deep blue
TEST = "#d9730d"  # amber
CURVE = "#1c2a35"
CONF_FILL = "rgba(42, 93, 143, 0.28)"
PRED_FILL = "rgba(120, 128, 140, 0.16)"
EXTRAP_FILL = "rgba(217, 115, 13, 0.08)"
STEADY = "#5e6b75"
HIGHLIGHT = "#b8002e"
FONT = '"Source Sans 3", "Segoe UI", "Noto Sans", "DejaVu Sans", Arial, sans-serif'
WEBGL_FROM = 5_000  # points per trace above which WebGL is used

CONFIDENCE = "confidence"
PREDICTION = "prediction"


def _base_layout(title: str, x_title: str, y_title: str, caption: str) -> dict:
    return dict(
        title=dict(
            text=title, x=0.01, xanchor="left", y=0.975, yref="container", yanchor="top", font=dict(size=17, color=INK)
        ),
        font=dict(family=FONT, size=13, color=INK),
        paper_bgcolor=PAPER,
        plot_bgcolor="#ffffff",
        margin=dict(l=72, r=24, t=96, b=100),
        xaxis=dict(
            title=dict(text=x_title), gridcolor=GRID, zeroline=False, showline=True, linecolor="#9aa3a8", mirror=True
        ),
        yaxis=dict(
            title=dict(text=y_title), gridcolor=GRID, zeroline=False, showline=True, linecolor="#9aa3a8", mirror=True
        ),
        legend=dict(
            orientation="h",
            yanchor="bottom",
            y=1.015,
            xanchor="left",
            x=0,
            font=dict(size=12),
            bgcolor="rgba(0,0,0,0)",
            itemwidth=30,
            traceorder="normal",
        ),
        annotations=[_caption(caption)],
        uirevision="keep",
    )


def plot_text(text) -> str:
    """Text for a plotly string: file-derived names must not act as plotly's HTML-like tags."""
    return html.escape(str(text), quote=False)


def caption_text(lines) -> str:
    return "<br>".join(plot_text(line) for line in lines)


def _caption(lines) -> dict:
    return dict(
        text=caption_text(lines),
        xref="paper",
        yref="paper",
        x=0,
        y=0,
        yshift=-54,  # pixels below the plot area, under the x-axis title, at any image size
        yanchor="top",
        xanchor="left",
        showarrow=False,
        align="left",
        font=dict(size=12, color="#44525c"),
        name="caption",
    )


def _trace(kind: str):
    """A trace as a plain dict: go.Figure validates it once, when the figure is built.

    Building go.Scatter objects one by one and then calling update_layout costs
    several times more (plotly validates every assignment), which made figure
    building the bulk of a split change's server time.
    """

    def make(**kw) -> dict:
        return dict(type=kind, **kw)

    return make


_line = _trace("scatter")


def _scatter(n: int):
    return _trace("scattergl" if n > WEBGL_FROM else "scatter")


def _list(a) -> list:
    return np.asarray(a, dtype=float).tolist()


def _wire(a) -> np.ndarray:
    """Curve values for a partial update: float32 is ample on screen and plotly ships it base64-packed."""
    return np.asarray(a, dtype=np.float32)


def wrapped_text(text, width: int) -> str:
    """``text`` for a plotly string, broken at spaces into lines of at most ``width`` characters
    (a word longer than a line is cut with an ellipsis), so long column names stay inside the chart."""
    lines: list[str] = []
    for word in str(text).split():
        word = word if len(word) <= width else word[: width - 1] + "…"
        if lines and len(lines[-1]) + 1 + len(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return "<br>".join(plot_text(line) for line in lines)


TITLE_CHARS = 72  # a longer title is cut with an ellipsis: the axis titles carry the full names


def fit_title(view: SplitView, degree: int) -> str:
    title = f"Degree {degree} fit: {view.y_label} against {view.x_label}"
    return plot_text(title if len(title) <= TITLE_CHARS else title[: TITLE_CHARS - 1] + "…")


def _point_traces(view: SplitView) -> list[dict]:
    """Training points (filled circles, blue) and test points (open diamonds, amber)."""
    n_pts = view.train_x.size + view.test_x.size
    sc = _scatter(n_pts)
    small = n_pts <= 2000
    train = sc(
        x=view.train_x,
        y=view.train_y,
        mode="markers",
        name="training",
        marker=dict(
            symbol="circle",
            size=7 if small else 4,
            color=TRAIN,
            opacity=0.85 if small else 0.5,
            line=dict(width=0.6, color="#ffffff") if small else dict(width=0),
        ),
        hovertemplate="x %{x:.6g}<br>y %{y:.6g}<extra>training</extra>",
    )
    test = sc(
        x=view.test_x,
        y=view.test_y,
        mode="markers",
        name="test (held out)",
        marker=dict(symbol="diamond-open", size=9 if small else 5, color=TEST, line=dict(width=2 if small else 1.2)),
        visible=True if view.has_test_points else "legendonly",
        showlegend=view.has_test_points,
        hovertemplate="x %{x:.6g}<br>y %{y:.6g}<extra>test</extra>",
    )
    return [train, test]


def _band_pair(grid: list, lo, hi, *, shown: bool, fill: str, name: str, lower_name: str) -> list[dict]:
    """A band as two line traces, the upper one filled down to the lower one."""
    common = dict(x=grid, mode="lines", line=dict(width=0), hoverinfo="skip", visible=shown)
    return [
        _line(y=_list(lo), showlegend=False, name=lower_name, **common),
        _line(y=_list(hi), fill="tonexty", fillcolor=fill, name=name, **common),
    ]


def _curve_traces(view: SplitView, dv: DegreeView, bands: set) -> list[dict]:
    """Prediction band, confidence band, then the curve (the order ``ids.FIT_TRACE_*`` names)."""
    g = _list(view.grid)
    pred = _band_pair(
        g, dv.pred_lo, dv.pred_hi, shown=PREDICTION in bands, fill=PRED_FILL,
        name="95 % prediction", lower_name="prediction band (lower)",
    )  # fmt: skip
    conf = _band_pair(
        g, dv.conf_lo, dv.conf_hi, shown=CONFIDENCE in bands, fill=CONF_FILL,
        name="95 % confidence", lower_name="confidence band (lower)",
    )  # fmt: skip
    curve = _line(
        x=g,
        y=_list(dv.curve),
        mode="lines",
        name=text.curve_label(dv.degree, view.split.mode),
        line=dict(color=CURVE, width=2.6),
        hovertemplate="x %{x:.6g}<br>fit %{y:.6g}<extra></extra>",
    )
    return [*pred, *conf, curve]


def _extrapolation_zones(view: SplitView) -> tuple[list[dict], list[dict]]:
    """Shaded rectangles and labels beyond the training range on either side."""
    tlo, thi = view.training_range
    shapes, notes = [], []
    for a, b in ((float(view.grid[0]), tlo), (thi, float(view.grid[-1]))):
        if b <= a:
            continue
        shapes.append(
            dict(type="rect", xref="x", yref="paper", x0=a, x1=b, y0=0, y1=1, fillcolor=EXTRAP_FILL,
                 line=dict(width=0), layer="below")
        )  # fmt: skip
        notes.append(
            dict(text="extrapolation", xref="x", yref="paper", x=(a + b) / 2, y=0.98, yanchor="top",
                 showarrow=False, textangle=-90, font=dict(size=11, color="#9a5208"))
        )  # fmt: skip
    return shapes, notes


def _sample_annotation(view: SplitView) -> dict:
    return dict(
        text=text.sample_note(view.points_shown, view.rows_used),
        xref="paper",
        yref="paper",
        x=1,
        y=1.0,
        xanchor="right",
        yanchor="bottom",
        showarrow=False,
        font=dict(size=11, color="#44525c"),
        bgcolor="rgba(255,253,248,0.8)",
    )


def fit_figure(view: SplitView, dv: DegreeView, bands=(CONFIDENCE,)) -> go.Figure:
    """Points (training and test), the display fit, its bands and the extrapolation zones."""
    traces = _point_traces(view) + _curve_traces(view, dv, set(bands or ()))
    caption = text.degree_caption(view, dv)
    layout = _base_layout(fit_title(view, dv.degree), plot_text(view.x_label), wrapped_text(view.y_label, 40), caption)
    # y range from the points (not from a wild curve), with room
    ys = np.concatenate([view.train_y, view.test_y])
    ylo, yhi = float(ys.min()), float(ys.max())
    pad = 0.12 * (yhi - ylo or 1.0)
    layout["yaxis"]["range"] = [ylo - pad, yhi + pad]
    layout["xaxis"]["range"] = [float(view.grid[0]), float(view.grid[-1])]
    shapes, notes = _extrapolation_zones(view)
    layout["shapes"] = shapes
    layout["annotations"] = layout["annotations"] + notes
    if view.sampled:
        layout["annotations"].append(_sample_annotation(view))
        layout["legend"]["y"] = 1.06
    return go.Figure(data=traces, layout=layout)


def fit_degree_patch(view: SplitView, dv: DegreeView, bands=(CONFIDENCE,)) -> Patch:
    """Partial update of the fit chart for a new degree: curve, bands, title, caption."""
    bands = set(bands or ())
    p = Patch()
    # a hidden band keeps its old values (plotly skips hidden traces); it is sent when shown
    if PREDICTION in bands:
        p["data"][ids.FIT_TRACE_PRED_LO]["y"] = _wire(dv.pred_lo)
        p["data"][ids.FIT_TRACE_PRED_HI]["y"] = _wire(dv.pred_hi)
    if CONFIDENCE in bands:
        p["data"][ids.FIT_TRACE_CONF_LO]["y"] = _wire(dv.conf_lo)
        p["data"][ids.FIT_TRACE_CONF_HI]["y"] = _wire(dv.conf_hi)
    p["data"][ids.FIT_TRACE_CURVE]["y"] = _wire(dv.curve)
    p["data"][ids.FIT_TRACE_CURVE]["name"] = text.curve_label(dv.degree, view.split.mode)
    for i in (ids.FIT_TRACE_PRED_LO, ids.FIT_TRACE_PRED_HI):
        p["data"][i]["visible"] = PREDICTION in bands
    for i in (ids.FIT_TRACE_CONF_LO, ids.FIT_TRACE_CONF_HI):
        p["data"][i]["visible"] = CONFIDENCE in bands
    p["layout"]["title"]["text"] = fit_title(view, dv.degree)
    p["layout"]["annotations"][0]["text"] = caption_text(text.degree_caption(view, dv))
    return p


def error_title(view: SplitView) -> str:
    return f"Error by degree: {view.split_label}"


def _error_traces(view: SplitView) -> list[dict]:
    """Training RMSE, test RMSE (± SE across splits) and the verdict sweep's test RMSE, by degree."""
    sweep, verdict = view.sweep, view.steady
    deg = sweep.degrees.astype(int).tolist()
    has_se = sweep.n_splits > 1
    train = _line(
        x=deg,
        y=_list(sweep.train_rmse),
        mode="lines+markers",
        name="training RMSE",
        line=dict(color=TRAIN, width=2),
        marker=dict(symbol="circle", size=7, color=TRAIN),
        hovertemplate="degree %{x}<br>training RMSE %{y:.4g}<extra></extra>",
    )
    se = _list(np.nan_to_num(sweep.test_rmse_se, nan=0.0))
    test = _line(
        x=deg,
        y=_list(sweep.test_rmse),
        mode="lines+markers",
        name="test RMSE" + (" ± SE" if has_se else ""),
        line=dict(color=TEST, width=2),
        marker=dict(symbol="diamond-open", size=9, color=TEST, line=dict(width=2)),
        error_y=dict(type="data", array=se, visible=has_se, color=TEST, thickness=1.3, width=4),
        hovertemplate="degree %{x}<br>test RMSE %{y:.4g}<extra></extra>",
    )
    steady = _line(
        x=verdict.degrees.astype(int).tolist(),
        y=_list(verdict.test_rmse),
        mode="lines",
        name=text.LEGEND_VERDICT,
        line=dict(color=STEADY, width=1.6, dash="dash"),
        hovertemplate="degree %{x}<br>steady CV RMSE %{y:.4g}<extra></extra>",
    )
    return [train, test, steady]


def _degree_markers(view: SplitView, dv: DegreeView) -> list[dict]:
    """The current degree (a ring on its test RMSE) and the recommended one (a star on the verdict's)."""
    current = _line(
        x=[dv.degree],
        y=[_current_y(dv)],
        mode="markers",
        name=text.LEGEND_CURRENT,
        marker=dict(symbol="circle-open", size=20, color=HIGHLIGHT, line=dict(width=3)),
        hoverinfo="skip",
    )
    rec = view.recommended_degree
    recommended = _line(
        x=[rec],
        y=[_steady_y(view, rec)],
        mode="markers+text",
        name="recommended",
        marker=dict(symbol="star", size=16, color="#2b8a3e", line=dict(width=1, color="#ffffff")),
        text=[f"recommended {rec}"],
        textposition="top center",
        textfont=dict(color="#2b8a3e", size=12),
        hoverinfo="skip",
    )
    return [current, recommended]


def error_figure(view: SplitView, dv: DegreeView) -> go.Figure:
    """Training and test RMSE per degree, the verdict sweep, the current and recommended degree."""
    traces = _error_traces(view) + _degree_markers(view, dv)
    layout = _base_layout(error_title(view), "polynomial degree", _rmse_title(view), text.degree_caption(view, dv))
    layout["yaxis"].update(
        type="log", dtick=1, minor=dict(ticks="inside", ticklen=4, showgrid=True, gridcolor="#f1eee7")
    )
    deg = view.sweep.degrees.astype(int)
    layout["xaxis"].update(dtick=1 if deg.size <= 13 else 2, range=[-0.5, int(deg.max()) + 0.5])
    layout["shapes"] = [_degree_band(dv.degree)]
    return go.Figure(data=traces, layout=layout)


def error_degree_patch(view: SplitView, dv: DegreeView) -> Patch:
    p = Patch()
    p["data"][ids.ERR_TRACE_CURRENT]["x"] = [dv.degree]
    p["data"][ids.ERR_TRACE_CURRENT]["y"] = [_current_y(dv)]
    p["layout"]["shapes"][0] = _degree_band(dv.degree)
    p["layout"]["annotations"][0]["text"] = caption_text(text.degree_caption(view, dv))
    return p


def _degree_band(d: int) -> dict:
    return dict(
        type="rect",
        xref="x",
        yref="paper",
        x0=d - 0.4,
        x1=d + 0.4,
        y0=0,
        y1=1,
        fillcolor="rgba(184, 0, 46, 0.07)",
        line=dict(width=0),
        layer="below",
    )


def _gap(v: float) -> float | None:
    """A y value for plotly: a missing (non-finite) value is drawn as a gap, never moved."""
    return v if np.isfinite(v) else None


def _current_y(dv: DegreeView) -> float | None:
    """The current degree's marker sits on the degree view's test RMSE (a gap when it is missing)."""
    return _gap(dv.test_rmse)


def _steady_y(view: SplitView, d: int) -> float | None:
    """The recommended degree's marker sits on the verdict sweep's test RMSE there (a gap when missing)."""
    return _gap(view.verdict_test_rmse(d))


def _rmse_title(view: SplitView) -> str:
    return plot_text(f"RMSE ({view.y_unit}, log scale)" if view.y_unit else "RMSE (log scale)")


def residual_figure(view: SplitView, model: ModelView) -> go.Figure:
    """Residuals (y − fit) against x for the chart's points."""
    n_tr = view.train_x.size
    sc = _scatter(model.residual_x.size)
    traces: list[dict] = []
    traces.append(
        sc(
            x=model.residual_x[:n_tr],
            y=model.residuals[:n_tr],
            mode="markers",
            name="training",
            marker=dict(symbol="circle", size=6 if n_tr < 2000 else 3, color=TRAIN, opacity=0.8),
        )
    )
    if model.residual_x.size > n_tr:
        traces.append(
            sc(
                x=model.residual_x[n_tr:],
                y=model.residuals[n_tr:],
                mode="markers",
                name="test",
                marker=dict(symbol="diamond-open", size=8 if n_tr < 2000 else 4, color=TEST, line=dict(width=1.6)),
            )
        )
    unit = f" ({view.y_unit})" if view.y_unit else ""
    layout = _base_layout(
        f"Residuals at degree {model.fit.degree}",
        plot_text(view.x_label),
        plot_text(f"residual{unit}"),
        text.residual_caption(model),
    )
    layout["margin"] = dict(l=72, r=24, t=64, b=100)
    layout["shapes"] = [
        dict(
            type="line",
            xref="paper",
            x0=0,
            x1=1,
            yref="y",
            y0=0,
            y1=0,
            line=dict(color="#7d868c", width=1.2, dash="dot"),
        )
    ]
    return go.Figure(data=traces, layout=layout)


def empty_figure(message: str) -> go.Figure:
    fig = go.Figure()
    fig.update_layout(
        paper_bgcolor=PAPER,
        plot_bgcolor="#ffffff",
        font=dict(family=FONT, color=INK),
        xaxis=dict(visible=False),
        yaxis=dict(visible=False),
        annotations=[
            dict(
                text=message,
                showarrow=False,
                xref="paper",
                yref="paper",
                x=0.5,
                y=0.5,
                font=dict(size=14, color="#44525c"),
            )
        ],
        margin=dict(l=20, r=20, t=20, b=20),
    )
    return fig


def image_options(filename: str) -> dict:
    """Plotly config for the modebar's camera button (PNG, presentation size)."""
    return {
        "displaylogo": False,
        "toImageButtonOptions": {"format": "png", "filename": filename, "width": 1600, "height": 900, "scale": 1},
        "modeBarButtonsToRemove": ["lasso2d", "select2d"],
    }
