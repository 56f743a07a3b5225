"""Try x values: predictions with confidence and prediction intervals at typed x values.

Predictions come from the hand-over model (every usable row, ``app/views_model.py``), the model
the downloads hold. The intervals follow the page's interval level (``ids.INTERVAL_LEVEL``, in
per cent, set by the read-back panel's level box and kept in the address; 95 % when unset), and
the table's header names it.

Typed values follow the file's decimal mark (carried in the settings record): with a decimal
comma, "250,5" is one value and semicolons or new lines separate values.
"""

from __future__ import annotations

import numpy as np
from dash import Input, Output, dcc, html

from .. import components, ids, views_model
from ..service import FitService, parse_x_values
from ..text import PREDICT_NOTE, interval_weight_note, prediction_head
from ._common import PageConfig, notice_on_error, panel
from .settings import from_key, level_fraction

SLOT = "tools"


def layout(cfg: PageConfig) -> html.Section:
    """The text box and the table under it."""
    return panel(
        "Try x values",
        html.Label("x values (commas, spaces or new lines)", htmlFor=ids.PREDICT_INPUT),
        dcc.Textarea(id=ids.PREDICT_INPUT, placeholder="e.g. 450, 900, 1500", className="predict-input"),
        html.P(PREDICT_NOTE, id=ids.PREDICT_NOTE, className="muted small"),
        html.Div(id=ids.PREDICT_TABLE, className="predict-table table-wrap"),
    )


OUTPUT = dict(table=Output(ids.PREDICT_TABLE, "children"))
INPUTS = dict(
    text=Input(ids.PREDICT_INPUT, "value"),
    key=Input(ids.SPLIT_KEY, "data"),
    degree=Input(ids.DEGREE_SETTLED, "data"),
    level=Input(ids.INTERVAL_LEVEL, "data"),
)


def typed_x(text, key) -> np.ndarray:
    """The typed x values, read with the decimal mark of the file on screen."""
    return parse_x_values(text, decimal=(key or {}).get("decimal", "."))


def on_predict(service: FitService, text, key, degree, level=None) -> dict:
    """The prediction table for the typed x values (the first rows of it when there are many).

    ``level``: the page's interval level in per cent (95 when empty).
    """
    xs = typed_x(text, key)
    if xs.size == 0 or not key or degree is None:
        return dict(table=html.P("Predictions appear here.", className="muted small"))
    ds, cols, split = from_key(key)
    sel = service.selection(ds, cols)
    lv = level_fraction(level)
    head = prediction_head(sel.x_name, sel.x_unit, sel.y_name, sel.y_unit, lv)
    fit = views_model.handover_model(service, ds, cols, split, degree).fit
    p = views_model.handover_predict(service, ds, cols, split, degree, xs, lv)
    table = components.handover_prediction_table(p, head)
    weight = interval_weight_note(fit)
    return dict(table=html.Div([table, html.P(weight, className="muted small")]) if weight else table)


def register(app, service: FitService) -> None:
    """Wire the prediction table."""
    app.callback(output=OUTPUT, inputs=INPUTS, on_error=notice_on_error(OUTPUT, "table", components.error_paragraph))(
        lambda text, key, degree, level: on_predict(service, text, key, degree, level)
    )
