"""HTML pieces built from the service's views: tables, the intake list, the alert, notices.

Numbers become text through ``app/_format.py`` only; sentences come from ``app/text.py``.
Text from a file is passed as a plain string child, which Dash renders as text.
"""

from __future__ import annotations

from dash import html

from . import text
from ._format import fmt_number, fmt_pm, fmt_r2
from .service import DatasetInfo, ModelView, PredictionView

PREDICT_ROWS_SHOWN = 50  # rows of the on-page prediction table; the CSV export holds every row


def error_span(message: str) -> html.Span:
    return html.Span(message, className="error")


def error_paragraph(message: str) -> html.P:
    return html.P(message, className="error")


def _table(head: tuple[str, ...], rows: list, class_name: str = "table") -> html.Table:
    return html.Table([html.Thead(html.Tr([html.Th(h) for h in head])), html.Tbody(rows)], className=class_name)


def _num_cell(value: str) -> html.Td:
    return html.Td(value, className="num")


def _interval(lo, hi, digits: int = 6) -> str:
    return f"{fmt_number(lo, digits)} … {fmt_number(hi, digits)}"


def intake_children(info: DatasetInfo) -> list:
    """The dataset's name and the intake report, one line per item."""
    items = [html.Li(line) for line in info.report_lines]
    if info.units:
        items.append(html.Li(text.units_line(info.units)))
    return [html.H3(info.name, className="dataset-name"), html.Ul(items, className="intake-lines")]


def alert(warnings) -> tuple[list, str]:
    """(children, className) of the overfitting alert; empty and hidden without warnings."""
    if not warnings:
        return [], "alert alert-off"
    return [html.Strong("Caution at this degree"), *[html.P(w) for w in warnings]], "alert alert-on"


def coefficient_table(model: ModelView) -> html.Table:
    rows = [
        html.Tr(
            [
                html.Td(r["term"]),
                _num_cell(fmt_number(r["coefficient"], 9)),
                _num_cell(fmt_number(r["se"], 4)),
                _num_cell(_interval(r["ci_lo"], r["ci_hi"])),
                html.Td(r["unit"]),
            ]
        )
        for r in model.coefficient_rows
    ]
    return _table(("term", "coefficient", "std. error", "95 % CI", "unit"), rows)


def stats_table(model: ModelView) -> html.Table:
    f = model.fit
    rows = [
        ("RMSE", fmt_number(f.rmse, 5), fmt_pm(model.test_rmse, model.test_rmse_se, 5)),
        ("R²", fmt_r2(f.r_squared, 7), fmt_r2(model.test_r2, 7)),
        ("adjusted R²", fmt_r2(f.adjusted_r_squared, 7), fmt_number(None)),
    ]
    body = [html.Tr([html.Th(a), _num_cell(b), _num_cell(c)]) for a, b, c in rows]
    return _table(("", "training (the fit)", "test"), body, "table stats-table")


def prediction_table(p: PredictionView) -> html.Table | html.Div:
    """The first PREDICT_ROWS_SHOWN predictions, and a note when there are more."""
    shown = min(p.x.size, PREDICT_ROWS_SHOWN)
    rows = []
    for i in range(shown):
        flag = text.outside_flag(bool(p.outside[i]))
        cells = [
            _num_cell(fmt_number(p.x[i], 8)),
            _num_cell(fmt_number(p.y[i], 8)),
            _num_cell(_interval(p.conf_lo[i], p.conf_hi[i])),
            _num_cell(_interval(p.pred_lo[i], p.pred_hi[i])),
            html.Td(flag, className="flag" if flag else ""),
        ]
        rows.append(html.Tr(cells, className="outside" if flag else ""))
    table = _table(("x", "predicted y", "95 % confidence", "95 % prediction", ""), rows)
    if shown == p.x.size:
        return table
    return html.Div([table, html.P(text.predictions_shown(shown, p.x.size), className="muted small")])
