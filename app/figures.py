"""Pure figure builders: plain views in, ``go.Figure`` out (the degree path is drawn in the browser, app/layers.py).

Trace order is fixed (see ``ids.POINTS_TRACE_*``, ``ids.FIT_TRACE_*``, ``ids.ERR_TRACE_*``) so
that the page's script and the figure sync can address the curve and bands by index.

Colours are a palette of our own, chosen to stay apart under the common forms of
colour blindness (blue against amber), and every pair that matters also differs in
shape: training points are filled circles, test points open diamonds.
"""

from __future__ import annotations

import html

import numpy as np
import plotly.graph_objects as go

from . import layers, text
from .service import DENSITY_FROM, DegreeView, ModelView, SplitView

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


def _list(a) -> list:
    return np.asarray(a, dtype=float).tolist()


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
    """Training points (filled circles, blue) and test points (open diamonds, amber), or their densities."""
    if view.dense:
        return _density_traces(view)
    small = view.points_shown <= 2000
    train = _line(
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
    test = _line(
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


def _density_traces(view: SplitView) -> list[dict]:
    """Training rows and test rows as two densities over the chart's ranges (every row counted)."""
    d = view.density
    return layers.density_traces(d.x, d.y, d.train, d.test, has_test=view.has_test_points)


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


def _x_range(view: SplitView) -> list[float]:
    return [float(view.grid[0]), float(view.grid[-1])]


def _y_range(view: SplitView) -> list[float]:
    """The y range from the rows (not from a wild curve), with room."""
    return [float(v) for v in view.y_range]


def _layer_layout(view: SplitView, title: str, caption) -> dict:
    """The layout both layers share: same margins (never widened by plotly) and the same axis ranges."""
    layout = _base_layout(title, plot_text(view.x_label), wrapped_text(view.y_label, 40), caption)
    layout["margin"].update(autoexpand=False, t=104, b=116)  # room for two legend rows and a third caption line
    layout["yaxis"]["range"] = _y_range(view)
    layout["xaxis"]["range"] = _x_range(view)
    return layout


def points_figure(view: SplitView) -> go.Figure:
    """The points layer: the rows (or their density) and the grid, under the curve layer."""
    layout = _layer_layout(view, "", ())
    layout.update(title=dict(text=""), annotations=[], legend=dict(layout["legend"], y=1.085))
    for axis in ("xaxis", "yaxis"):
        layout[axis].update(title=dict(text=""), showticklabels=False, showline=False)
    return go.Figure(data=_point_traces(view), layout=layout)


def fit_caption(view: SplitView, dv: DegreeView) -> tuple[str, ...]:
    """The fit chart's caption: the numbers at this degree, the split, and how the rows are drawn."""
    lines = text.degree_caption(view, dv)
    if view.dense:
        d = view.density
        return (*lines, text.density_note(view.rows_used, d.train.shape[1], d.train.shape[0], d.x_step, d.y_step))
    return lines  # fewer rows than DENSITY_FROM: every row is drawn


def fit_figure(view: SplitView, dv: DegreeView, bands=(CONFIDENCE,)) -> go.Figure:
    """The curve layer: the display fit, its bands, the extrapolation zones, axes, title and caption.

    Transparent, so that the points layer (``points_figure``) shows through beneath it.
    """
    layout = _layer_layout(view, fit_title(view, dv.degree), fit_caption(view, dv))
    layout.update(paper_bgcolor="rgba(0,0,0,0)", plot_bgcolor="rgba(0,0,0,0)")
    for axis in ("xaxis", "yaxis"):
        layout[axis].update(showgrid=False)
    shapes, notes = _extrapolation_zones(view)
    layout["shapes"] = shapes
    layout["annotations"] = layout["annotations"] + notes
    layout["meta"] = {"frames": layers.frames_stamp(view)}
    return go.Figure(data=_curve_traces(view, dv, set(bands or ())), layout=layout)


def fit_chart_layers(view: SplitView, dv: DegreeView, bands=(CONFIDENCE,)) -> go.Figure:
    """Both layers as one figure, for images and the HTML report."""
    both = layers.combined(points_figure(view).to_plotly_json(), fit_figure(view, dv, bands).to_plotly_json())
    return go.Figure(both)


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
    # a marker, round on the log axis at any size (a pixel-sized layout shape on a log axis is
    # drawn squashed by plotly); on a key press the page's script moves the drawn marker itself
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
    ticks = log_ticks(view)
    layout["yaxis"].update(type="log", **ticks)
    if "dtick" in ticks:  # minor ticks follow a decade step; beside listed ticks plotly could draw countless
        layout["yaxis"]["minor"] = dict(ticks="inside", ticklen=4, showgrid=True, gridcolor="#f1eee7")
    deg = view.sweep.degrees.astype(int)
    layout["xaxis"].update(dtick=1 if deg.size <= 13 else 2, range=[-0.5, int(deg.max()) + 0.5])
    layout["shapes"] = [_degree_band(dv.degree)]
    return go.Figure(data=traces, layout=layout)


def log_ticks(view: SplitView) -> dict:
    """Tick values and labels for the log RMSE axis that always show numbers.

    Whole decades when the RMSEs span three decades or more; 1-2-5 steps from one decade up;
    1 to 9 steps under a decade, where a log axis with decade ticks alone would show no number.
    """
    vals = np.concatenate([view.sweep.train_rmse, view.sweep.test_rmse, view.steady.test_rmse])
    vals = vals[np.isfinite(vals) & (vals > 0)]
    if vals.size == 0:
        return dict(dtick=1)
    lo, hi = float(vals.min()), float(vals.max())
    span = np.log10(hi / lo)
    if span >= 3:
        return dict(dtick=1)
    if span < 0.5:  # a narrow range: evenly spaced round values, about five of them
        raw = (hi - lo) / 4 or hi / 10
        step = min((m * 10.0 ** np.floor(np.log10(raw)) for m in (1, 2, 5, 10)), key=lambda v: abs(v - raw))
        ticks = [v for v in np.arange(np.floor(lo / step) - 1, np.ceil(hi / step) + 2) * step if v > 0]
    else:
        steps = (1, 2, 5) if span >= 1 else tuple(range(1, 10))
        decades = range(int(np.floor(np.log10(lo))) - 1, int(np.ceil(np.log10(hi))) + 1)
        ticks = [m * 10.0**e for e in decades for m in steps]
    return dict(tickmode="array", tickvals=ticks, ticktext=[f"{v:.3g}" for v in ticks])


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


def _residual_traces(view: SplitView, model: ModelView) -> list[dict]:
    """Residual markers, training then test; above DENSITY_FROM points, their densities."""
    n_tr = view.train_x.size
    rx, res = model.residual_x, model.residuals
    if rx.size > DENSITY_FROM:
        test = np.arange(rx.size) >= n_tr
        lo, hi = float(np.min(res)), float(np.max(res))
        pad = 0.08 * (hi - lo or 1.0)
        d = layers.binned(rx, res, test, _x_range(view), (lo - pad, hi + pad))
        return layers.density_traces(d.x, d.y, d.train, d.test, has_test=bool(test.any()), what="residuals")
    traces = [
        _line(x=rx[:n_tr], y=res[:n_tr], mode="markers", name="training",
              marker=dict(symbol="circle", size=6, color=TRAIN, opacity=0.8))
    ]  # fmt: skip
    if rx.size > n_tr:
        traces.append(
            _line(x=rx[n_tr:], y=res[n_tr:], mode="markers", name="test",
                  marker=dict(symbol="diamond-open", size=8, color=TEST, line=dict(width=1.6)))
        )  # fmt: skip
    return traces


def residual_figure(view: SplitView, model: ModelView) -> go.Figure:
    """Residuals (y − fit) against x for the chart's points."""
    traces = _residual_traces(view, model)
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
