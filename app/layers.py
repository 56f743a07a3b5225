"""The fit chart in two stacked layers, and dense data drawn as a density.

The fit chart is two plotly graphs of the same size, axes and margins, one above the other:

* the **points layer** (``ids.FIT_POINTS``, below): the rows, as markers up to
  ``DENSITY_FROM`` rows, above that as a density (counts in bins, training and test rows
  each their own heatmap), with the grid lines. A degree change never touches it.
* the **curve layer** (``ids.FIT_CHART``, above, transparent): curve, bands, axes, title,
  legend, caption and marks. A degree change patches only this one, in the browser, from
  ``degree_frames`` (every degree's curve and bands on the grid, sent once per split).

Plotly redraws every trace of a graph on any change to it, so keeping the thousands of
points out of the graph a degree change touches is what keeps a key press quick. The
curve layer lets pointer events through to the points below (hover, click, zoom, pan), and
the page keeps the two layers' axis ranges equal (``assets/degreescope-layers.js``).

For images and the HTML report the two are merged into one figure (``combined``).
"""

from __future__ import annotations

import base64

import numpy as np

from . import components, ids, text
from .service import DegreeView, Density, FitService, SplitView

TRAIN_SCALE = [[0.0, "#d6e4f0"], [0.5, "#6f9cc4"], [1.0, "#12365a"]]  # light to deep blue
TEST_SCALE = [[0.0, "#fbe3c8"], [0.5, "#eea155"], [1.0, "#8f4304"]]  # light to deep amber


def wire(values) -> dict:
    """An array as plotly.js reads a packed one: float32, base64 (NaN stays NaN: a gap)."""
    a = np.ascontiguousarray(np.asarray(values, dtype=np.float32))
    return {"dtype": "f4", "bdata": base64.b64encode(a.tobytes()).decode("ascii")}


def density_trace(xc, yc, counts, *, name: str, scale: list, opacity: float = 1.0) -> dict:
    """A heatmap of row counts (rows of ``counts`` along y), coloured on a log scale; empty bins transparent."""
    counts = np.asarray(counts, dtype=float)
    shown = np.where(counts > 0, np.log10(np.maximum(counts, 1.0)) + 1.0, np.nan)  # 1 row -> 1, 10 rows -> 2
    return dict(
        type="heatmap",
        x=np.asarray(xc, dtype=float).tolist(),
        y=np.asarray(yc, dtype=float).tolist(),
        z=[[None if np.isnan(v) else round(float(v), 3) for v in row] for row in shown],
        customdata=counts.astype(np.int64).tolist(),
        colorscale=scale,
        zmin=1.0,
        showscale=False,
        opacity=opacity,
        name=name,
        showlegend=True,
        hovertemplate=f"x ≈ %{{x:.4g}}<br>y ≈ %{{y:.4g}}<br>%{{customdata}} rows<extra>{name}</extra>",
        hoverongaps=False,
    )


def density_traces(xc, yc, train, test, *, has_test: bool, what: str = "rows") -> list[dict]:
    """Training and test counts as two heatmaps, test above and half see-through; test hidden when empty."""
    tr = density_trace(xc, yc, train, name=f"training {what} (density)", scale=TRAIN_SCALE)
    te = density_trace(xc, yc, test, name=f"test {what} (density)", scale=TEST_SCALE, opacity=0.45)
    te.update(visible=True if has_test else "legendonly", showlegend=has_test)
    return [tr, te]


def binned(x, y, test, x_range, y_range) -> Density:
    """Counts of (x, y) in the service's bins: the residual chart's density."""
    return Density.of(np.asarray(x, float), np.asarray(y, float), np.asarray(test, bool), x_range, y_range)


def degree_frames(service: FitService, ds: str, cols, split, view: SplitView) -> dict:
    """Every degree's curve, bands, title, caption, readout and alert: what the browser shows on a key press.

    About 5 × 400 float32 values per degree, packed; the words are the server's own (``text``,
    ``components.alert``), so the browser only copies them in.
    """
    from .figures import caption_text, fit_caption, fit_title

    frames = {}
    for d in range(view.max_degree + 1):
        dv: DegreeView = service.degree_view(ds, cols, split, d)
        alert, alert_class = components.alert(dv.warnings)
        frames[str(d)] = {
            "curve": wire(dv.curve),
            "conf_lo": wire(dv.conf_lo),
            "conf_hi": wire(dv.conf_hi),
            "pred_lo": wire(dv.pred_lo),
            "pred_hi": wire(dv.pred_hi),
            "name": text.curve_label(d, view.split.mode),
            "title": fit_title(view, d),
            "caption": caption_text(text.degree_caption(view, dv)),  # the error chart's
            "fit_caption": caption_text(fit_caption(view, dv)),
            "test_rmse": dv.test_rmse if np.isfinite(dv.test_rmse) else None,
            "readout": text.degree_readout(dv),
            "alert": [c.to_plotly_json() for c in alert],
            "alert_class": alert_class,
        }
    traces = {
        "curve": ids.FIT_TRACE_CURVE, "pred_lo": ids.FIT_TRACE_PRED_LO, "pred_hi": ids.FIT_TRACE_PRED_HI,
        "conf_lo": ids.FIT_TRACE_CONF_LO, "conf_hi": ids.FIT_TRACE_CONF_HI,
    }  # fmt: skip
    return {
        "max": view.max_degree, "frames": frames, "traces": traces, "ring": ids.ERR_TRACE_CURRENT,
        "stamp": frames_stamp(view),
    }  # fmt: skip


def frames_stamp(view: SplitView) -> str:
    """Names the split view a curve layer and its frames were made from (the script draws only onto its own)."""
    return f"{id(view):x}"


def combined(points: dict, fit: dict) -> dict:
    """One figure of both layers (points first, then the curve layer's traces), on the curve layer's layout
    with opaque backgrounds: for images and the HTML report."""
    layout = dict(fit["layout"])
    layout.update(paper_bgcolor=points["layout"].get("paper_bgcolor"), plot_bgcolor="#ffffff")
    for axis in ("xaxis", "yaxis"):
        layout[axis] = dict(layout[axis], showgrid=True)
    return {"data": list(points["data"]) + list(fit["data"]), "layout": layout}
