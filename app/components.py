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
    return _table(("term", "coefficient", "std. error", f"{text.level_text(model.level)} CI", "unit"), rows)


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
    """Coefficients with their standard errors, intervals (at ``model.level``) and units; the constant is
    named "constant"."""
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
    head = ("term", "coefficient", "std. error", f"{text.level_text(model.level)} CI", "unit")
    return _table(head, rows, "table coef-table")


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


# ----------------------------------------------------------------------------
# evidence panel (app/panels/evidence.py)


def _p_cell(p) -> html.Td:
    return _num_cell(text.p_value(p))


def _evidence_row(view, d: int, shown: int | None, lof: bool, best: tuple[float, float]) -> html.Tr:
    ev = view.evidence
    i = ev.index(d)
    rmse, se = view.cv_rmse(d)
    cells = [html.Td(str(d)), _num_cell(fmt_pm(rmse, se))]
    if lof:
        df = ev.lack_of_fit_df[i]
        df_text = fmt_number(None) if df != df else f"{int(df)}, {ev.pure_error_df}"
        cells += [_num_cell(fmt_number(ev.lack_of_fit_f[i], 4)), _num_cell(df_text), _p_cell(ev.lack_of_fit_p[i])]
    cells += [
        _num_cell(fmt_number(ev.added_term_f[i], 4)),
        _p_cell(ev.added_term_p[i]),
        _num_cell(fmt_number(ev.aic[i] - best[0], 4, zero_below=1e-9)),
        _num_cell(fmt_number(ev.bic[i] - best[1], 4, zero_below=1e-9)),
    ]
    marks = ("recommended" if d == view.recommended else "") + (" shown" if d == shown else "")
    return html.Tr(cells, className=marks.strip())


def _lowest(values) -> float:
    finite = [float(v) for v in values if v == v and abs(v) != float("inf")]
    return min(finite) if finite else float("nan")


def evidence_table(view, shown: int | None) -> html.Table:
    """One row per degree: the verdict's CV RMSE beside lack of fit, the added-term test, ΔAIC and ΔBIC."""
    ev = view.evidence
    lof = ev.has_lack_of_fit
    degs = view.shown_degrees(shown)
    at = [ev.index(d) for d in degs]
    best = (_lowest(ev.aic[i] for i in at), _lowest(ev.bic[i] for i in at))
    head = ("degree", "CV test RMSE ± SE")
    if lof:
        head += ("lack-of-fit F", "df (lack of fit, pure error)", "lack-of-fit p")
    head += ("added-term F", "added-term p", "ΔAIC", "ΔBIC")
    rows = [_evidence_row(view, d, shown, lof, best) for d in degs]
    return _table(head, rows, "table evidence-table")


def _flag_words(row, thresholds: dict) -> str:
    return "; ".join(
        f"{text.INFLUENCE_FLAG_NAMES.get(k, k)} > {fmt_number(thresholds[k]['value'], 3)}" for k in row.flags
    )


def influence_table(rows, thresholds: dict) -> html.Table:
    """The flagged rows: line, x, y, leverage, studentized residual, Cook's distance, the flag and its thresholds."""
    body = [
        html.Tr(
            [
                _num_cell(str(r.line)),
                _num_cell(fmt_number(r.x, 6)),
                _num_cell(fmt_number(r.y, 6)),
                _num_cell(fmt_number(r.leverage, 3)),
                _num_cell(fmt_number(r.studentized, 3)),
                _num_cell(fmt_number(r.cooks, 3)),
                html.Td(text.INFLUENCE_VERDICT_WORDS.get(r.verdict, "review"), className="flag"),
                html.Td(_flag_words(r, thresholds), className="small"),
            ]
        )
        for r in rows
    ]
    head = ("line", "x", "y", "leverage", "studentized residual", "Cook's distance", "flag", "over the threshold")
    return _table(head, body, "table influence-table")


def threshold_list(thresholds: dict) -> html.Ul:
    """Each influence threshold with its rule, its value here and its source."""
    items = [
        html.Li(text.threshold_line(text.INFLUENCE_FLAG_NAMES.get(k, k), t["rule"], t["value"], t["source"]))
        for k, t in thresholds.items()
    ]
    return html.Ul(items, className="thresholds small muted")


def left_out_list(exclusions, put_back_type: str) -> list:
    """The rows left out, each with its reason and a button that puts it back."""
    if not exclusions:
        return [html.P(text.no_left_out(), className="muted small")]
    items = [
        html.Li(
            [
                html.Span(text.left_out_item(e.line, e.reason), className="left-out-text"),
                html.Button(
                    "Put back",
                    id={"type": put_back_type, "line": e.line},
                    n_clicks=0,
                    className="btn btn-small",
                    title=f"put line {e.line} back into the fit",
                ),
            ],
            className="left-out-item",
        )
        for e in exclusions
    ]
    return [
        html.Ul(items, className="left-out-list"),
        html.P(text.left_out_note(len(exclusions)), className="muted small"),
    ]


# calibration: the read-back table, the standards table and the weighting comparison

READBACK_ROWS_SHOWN = 50  # readings listed on the page; the chart marks the first few


def _reading_rows(r, level: float, domain: tuple[float, float]) -> list:
    """One row of numbers per reading, and a row of its warnings in words under it."""
    single = len(r.roots) == 1
    interval = text.readback_interval(r.x_lower, r.x_upper, level, domain) if single else "—"
    cells = [
        _num_cell(fmt_number(r.y, 8)),
        _num_cell(fmt_number(r.x, 8)),
        html.Td(interval, className="num cal-interval"),
        _num_cell(fmt_number(r.u_x, 4)),
    ]
    warn = "" if single and not r.warnings else "cal-warn"
    rows = [html.Tr(cells, className=warn)]
    if r.warnings:
        notes = html.Td([html.Div(n) for n in r.warnings], colSpan=len(cells), className="cal-notes")
        rows.append(html.Tr(notes, className="cal-warn cal-note-row"))
    return rows


def readback_table(result, domain: tuple[float, float]) -> html.Div:
    """x, its calibration interval and u(x) per reading, every warning in words, and the curve's own notes."""
    shown = min(len(result.rows), READBACK_ROWS_SHOWN)
    rows = [tr for r in result.rows[:shown] for tr in _reading_rows(r, result.level, domain)]
    head = list(text.READBACK_HEAD)
    head[2] = text.readback_interval_head(result.level)
    parts: list = [
        html.P(text.readback_mean_of(result.readings), className="muted small"),
        _table(tuple(head), rows, "table cal-table"),
    ]
    if shown < len(result.rows):
        parts.append(html.P(text.readbacks_shown(shown, len(result.rows)), className="muted small"))
    parts.extend(html.P(w, className="cal-warning") for w in result.warnings)
    return html.Div(parts)


def _verdict_cell(ok) -> html.Td:
    if ok is None:
        return html.Td(text.NOT_JUDGED, className="muted")
    return html.Td(text.PASS if ok else text.FAIL, className="cal-pass" if ok else "cal-fail")


def standards_table(back) -> html.Table:
    """Each standard: line, x, y, x back, relative error %, pass/fail and the note."""
    rows = [
        html.Tr(
            [
                _num_cell("" if r.line is None else str(r.line)),
                _num_cell(fmt_number(r.x, 6)),
                _num_cell(fmt_number(r.y, 6)),
                _num_cell(fmt_number(r.x_back, 6)),
                _num_cell(fmt_number(r.relative_error_percent, 3)),
                _verdict_cell(r.within_tolerance),
                html.Td(text.standard_note(r.x, r.note), className="cal-notes"),
            ],
            className="cal-warn" if r.within_tolerance is False else "",
        )
        for r in back.rows
    ]
    return _table(text.STANDARDS_HEAD, rows, "table cal-table")


def weighting_table(comparison, chosen: str) -> html.Table:
    """The named weightings ranked by Σ|error %|; the one in use is marked."""
    rows = []
    for r in comparison.rows:
        label = r.label + (" (in use)" if r.weighting == chosen else "")
        cells = [
            _num_cell("—" if r.rank is None else str(r.rank)),
            html.Td(label),
            _num_cell(fmt_number(r.sum_abs_relative_error_percent, 4)),
            html.Td(r.note or "", className="cal-notes"),
        ]
        rows.append(html.Tr(cells, className="cal-best" if r.weighting == comparison.best else ""))
    return _table(text.WEIGHTING_HEAD, rows, "table cal-table")
