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


# -- data panel: the intake report with every row left out ------------------------------------


def intake_report(info: DatasetInfo, selection=None) -> list:
    """The dataset's name, how it was read, every reason rows were left out with their line numbers, the notes.

    ``selection`` (a ``fitting.Selection`` for the columns in use) adds the rows the columns
    leave out; without it the file's own report is shown.
    """
    if selection is None or not info.head_lines:
        return intake_children(info)
    items = [html.Li(line) for line in info.head_lines]
    drops = [html.Li(text.dropped_line(r, d.count, d.listed_lines)) for r, d in selection.dropped.items()]
    head = text.rows_left_out_head(selection.x_name, selection.y_name, int(selection.rows_dropped))
    items.append(html.Li([head, html.Ul(drops, className="intake-drops")] if drops else head))
    items.extend(html.Li(n) for n in info.notes)
    if info.units:
        items.append(html.Li(text.units_line(info.units)))
    return [html.H3(info.name, className="dataset-name"), html.Ul(items, className="intake-lines")]


# ----------------------------------------------------------------------------
# model card and predictions (the hand-over model; app/panels/model.py and predict.py)


def _interval_cell(lo, hi, digits: int = 6) -> html.Td:
    """An interval that may wrap between its ends, so a narrow panel never cuts it."""
    return html.Td(
        [html.Span(f"{fmt_number(lo, digits)} …", className="nowrap"), " ", html.Span(fmt_number(hi, digits))],
        className="num interval",
    )


def model_stats_table(model: ModelView, y_scale: float = 0.0, mode: str = "holdout") -> html.Table:
    """The hand-over fit's numbers beside the split's held-out numbers (formatted as the chart captions are).

    ``y_scale`` is the largest |y|: an RMSE below 1e-12 of it is rounding noise ("0"). ``mode`` is the split's.
    """
    from ._format import zero_scale

    f = model.fit
    tiny = zero_scale([y_scale])
    rows = [
        (
            text.rmse_label(f.weighted),
            fmt_number(f.rmse, 5, zero_below=tiny),
            fmt_pm(model.test_rmse, model.test_rmse_se, text.RMSE_DIGITS),  # weighted too, when the fit is
        )
    ]
    if f.weighted:
        rows.append(
            (
                text.plain_rmse_label(model.y_unit),
                fmt_number(f.plain_rmse, 5, zero_below=tiny),
                fmt_number(None),
            )
        )
    rows += [
        ("R²", fmt_r2(f.r_squared, text.R2_DIGITS), fmt_r2(model.test_r2, text.R2_DIGITS)),
        ("adjusted R²", fmt_r2(f.adjusted_r_squared, text.R2_DIGITS), fmt_number(None)),
    ]
    body = [html.Tr([html.Th(a), _num_cell(b), _num_cell(c)]) for a, b, c in rows]
    return _table(text.stats_head(mode), body, "table stats-table")


def model_coefficient_table(model: ModelView) -> html.Table:
    """Coefficients with their standard errors, 95 % intervals and units; the constant is named "constant"."""
    from ._format import term_name

    rows = [
        html.Tr(
            [
                html.Td(term_name(r["power"])),
                _num_cell(fmt_number(r["coefficient"], 9)),
                _num_cell(fmt_number(r["se"], 4)),
                _interval_cell(r["ci_lo"], r["ci_hi"]),
                html.Td(r["unit"], className="unit"),
            ]
        )
        for r in model.coefficient_rows
    ]
    return _table(("term", "coefficient", "std. error", "95 % CI", "unit"), rows, "table coef-table")


def handover_prediction_table(p: PredictionView, head: tuple[str, ...]) -> html.Table | html.Div:
    """The first PREDICT_ROWS_SHOWN predictions of the hand-over model, and a note when there are more."""
    shown = min(p.x.size, PREDICT_ROWS_SHOWN)
    rows = []
    for i in range(shown):
        flag = text.outside_flag_short(bool(p.outside[i]))
        cells = [
            _num_cell(fmt_number(p.x[i], 8)),
            _num_cell(fmt_number(p.y[i], 8)),
            _interval_cell(p.conf_lo[i], p.conf_hi[i]),
            _interval_cell(p.pred_lo[i], p.pred_hi[i]),
            html.Td(flag, className="flag" if flag else ""),
        ]
        rows.append(html.Tr(cells, className="outside" if flag else ""))
    table = _table(head, rows, "table predict-rows")
    if shown == p.x.size:
        return table
    return html.Div([table, html.P(text.predictions_shown(shown, p.x.size), className="muted small")])
