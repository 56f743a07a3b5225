"""What a user takes away: a self-contained HTML report, the model JSON, a predictions CSV.

* The model JSON and the predictions CSV are written by ``app.handover``, the one
  writer both front ends use (the same columns and provenance as the command line).
  Text cells that a spreadsheet could read as a formula (they begin with ``=``, ``+``,
  ``-``, ``@``, a tab or a carriage return) are prefixed with a single quote, as the
  OWASP guidance on CSV injection advises; numbers are written as plain numbers and
  are never touched, so -1.5 stays -1.5.
* The HTML report inlines plotly's JavaScript (it opens offline) and escapes every
  piece of text that came from the file.
"""

from __future__ import annotations

import html
from datetime import datetime, timezone
from typing import Any, Mapping, Sequence

import plotly.graph_objects as go

from . import handover
from ._format import fmt_number, fmt_pm, fmt_r2, term_name
from .service import DatasetInfo, DegreeView, ModelView, PredictionView, SplitView

__all__ = ["neutralise_cell", "predictions_csv", "model_json", "html_report", "CAUTION_TEXT"]


CAUTION_TEXT = (
    "Polynomial fits are unreliable outside the range of the data they were fitted on. "
    "A calibration used for safety-, health- or legally relevant measurement must follow the applicable "
    "standards and local procedures; this tool does not replace them."
)


def neutralise_cell(value: Any) -> str:
    """A CSV cell as text (``app.handover.csv_cell``).

    Numbers are written as plain numbers: a value such as -1.5 is a number to
    every spreadsheet, not a formula. Text gets a leading single quote when it
    begins with = + - @, tab or CR (OWASP CSV injection guidance).
    """
    return handover.csv_cell(value)


def predictions_csv(pred: PredictionView, *, x_name: str, y_name: str, y_observed=None, level: float = 0.95) -> str:
    """Predictions with confidence and prediction intervals at ``level``, one row per x (``app.handover``)."""
    return handover.predictions_csv(
        pred.x,
        pred.y,
        (pred.conf_lo, pred.conf_hi),
        (pred.pred_lo, pred.pred_hi),
        pred.outside,
        x_name=x_name,
        y_name=y_name,
        level=level,
        y_observed=y_observed,
    )


def model_json(fit, fitted_from: dict | None = None) -> str:
    """The model file (``app.handover.model_json``): ``to_dict()`` plus provenance, strict JSON.

    ``fitted_from`` is ``app.handover.provenance(...)``; without it the file records the version only.
    """
    return handover.model_json(fit, fitted_from)


def _fmt(v, digits=6) -> str:
    return fmt_number(v, digits)


def _table(head: list[str], rows: list[list[str]]) -> str:
    th = "".join(f"<th>{html.escape(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>"


def settings_rows(view: SplitView, degree: int) -> list[list[str]]:
    c = view.columns
    return [
        ["x column", c.x],
        ["y column", c.y],
        ["weights column", c.weights or "none"],
        ["weighting", c.weighting],
        ["group column", c.group or "none"],
        ["degree", str(degree)],
        ["split shown", view.split_label],
        ["verdict measure", view.steady_label],
    ]


_STYLE = """\
body { font-family: "Source Sans 3", "Segoe UI", "Noto Sans", Arial, sans-serif; color: #1c2a35;
       background: #f5f2ea; margin: 0; padding: 24px 40px; max-width: 1150px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 18px; border-bottom: 2px solid #d9730d; padding-bottom: 3px; }
table { border-collapse: collapse; margin: 8px 0 16px; background: #fff; }
td, th { border: 1px solid #d9d4c7; padding: 4px 10px; text-align: left; font-variant-numeric: tabular-nums; }
th { background: #ece7da; } .warn { background: #fff1e0; border-left: 5px solid #b8002e; padding: 6px 14px; }
.caution { background: #eef3f7; border-left: 5px solid #2a5d8f; padding: 8px 14px; }
code { background: #fff; padding: 2px 6px; border: 1px solid #d9d4c7; }
"""


def _coefficient_rows(model: ModelView) -> list[list[str]]:
    return [
        [
            term_name(r["power"]),
            _fmt(r["coefficient"], 10),
            _fmt(r["se"], 4),
            _fmt(r["ci_lo"], 8),
            _fmt(r["ci_hi"], 8),
            r["unit"],
        ]
        for r in model.coefficient_rows
    ]


def _statistic_rows(view: SplitView, model: ModelView) -> list[list[str]]:
    fit = model.fit
    rows = [
        ["R² (fit)", fmt_r2(fit.r_squared, 8)],
        ["adjusted R² (fit)", fmt_r2(fit.adjusted_r_squared, 8)],
        ["weighted RMSE (fit rows)" if fit.weighted else "RMSE (fit rows)", _fmt(fit.rmse, 6)],
    ]
    plain = getattr(fit, "plain_rmse", None)
    if fit.weighted and plain is not None:
        rows.append(["RMSE, unweighted (fit rows)", _fmt(plain, 6)])
    return rows + [
        ["residual SD, weighted" if fit.weighted else "residual SD", _fmt(fit.residual_sd, 6)],
        ["test RMSE (" + view.split_label + ")", fmt_pm(model.test_rmse, model.test_rmse_se, 6)],
        ["test R²", fmt_r2(model.test_r2, 8)],
        ["rows in the fit", f"{fit.n:,}"],
        ["degrees of freedom", str(fit.dof)],
        ["condition number (mapped x)", _fmt(fit.condition_number, 3)],
        ["x range of the fit", f"{_fmt(fit.domain[0])} to {_fmt(fit.domain[1])}"],
    ]


def _warnings_html(warnings: list[str]) -> str:
    if not warnings:
        return "<p>No warning stands at this degree.</p>"
    items = "".join(f"<li>{html.escape(w)}</li>" for w in warnings)
    return f"<div class='warn'><strong>Warnings at this degree</strong><ul>{items}</ul></div>"


def _as_dict(obj: Any) -> dict | None:
    if obj is None:
        return None
    return obj.to_dict() if hasattr(obj, "to_dict") else dict(obj)


def _yes_no(v: Any) -> str:
    return "—" if v is None else ("yes" if v else "no")


def _read_back_html(read_back: Any) -> str:
    """The readings the user read back (``fitting.read_back`` or its ``to_dict()``): table, notes, caution."""
    d = _as_dict(read_back)
    if not d:
        return ""
    e = html.escape
    rows = [
        [_fmt(r["y"], 8), str(r.get("readings", 1)), _fmt(r.get("x"), 8), _fmt(r.get("x_lower"), 8),
         _fmt(r.get("x_upper"), 8), _fmt(r.get("u_x"), 4), "; ".join(_fmt(v, 8) for v in r.get("roots", [])),
         " ".join(r.get("warnings", []))]
        for r in d["rows"]
    ]  # fmt: skip
    pct = f"{float(d.get('level', 0.95)) * 100:g} %"
    notes = "".join(f"<li>{e(w)}</li>" for w in d.get("warnings", []))
    head = ["reading y", "readings averaged", "x read back", f"{pct} lower", f"{pct} upper", "u(x)", "roots in range"]
    return (
        "<h2>Read-back of unknowns</h2>"
        f"<p>Each reading read back through the curve (weighting {e(str(d.get('weighting', 'none')))}), with the "
        f"{pct} calibration interval (NIST/SEMATECH e-Handbook, section 4.5.2.1) and the standard uncertainty of x "
        "(EURACHEM/CITAC guide, appendix E.3). x is left empty where there is no single answer in the range.</p>"
        + _table(head + ["notes"], rows)
        + (f"<div class='warn'><ul>{notes}</ul></div>" if notes else "")
        + f"<p class='caution'>{e(d.get('caution') or CAUTION_TEXT)}</p>"
    )


def _back_calculation_html(back: Any) -> str:
    """The back-calculated standards (``fitting.back_calculate`` or its ``to_dict()``): table, summary, rule."""
    d = _as_dict(back)
    if not d:
        return ""
    e = html.escape
    rows = [
        ["" if r.get("line") is None else str(r["line"]), _fmt(r["x"], 8), _fmt(r["y"], 8), _fmt(r.get("x_back"), 8),
         _fmt(r.get("relative_error_percent"), 4), _yes_no(r.get("within_tolerance")), r.get("note") or ""]
        for r in d["rows"]
    ]  # fmt: skip
    s = d["summary"]
    verdict = "accepted" if s["accepted"] else "not accepted"
    summary = (
        f"{s['standards_passing']} of {s['standards']} standards pass ({_fmt(s['share_passing_percent'], 4)} %), "
        f"{s['levels_passing']} of {s['levels']} levels pass: {verdict} by the FDA 2018 / ICH M10 rule as set."
    )
    head = ["line", "x", "y", "x back", "relative error %", "within tolerance", "note"]
    return (
        f"<h2>Back-calculated standards</h2>{_table(head, rows)}<p><strong>{e(summary)}</strong></p>"
        f"<p>Rule: {e(str(d.get('rule', '')))}</p>"
    )


def _left_out_rows(left_out: Any) -> list[list[str]]:
    if isinstance(left_out, Mapping):
        items = [dict(_as_dict(v) or {}, reason=k) for k, v in left_out.items()]
    else:
        items = [_as_dict(v) or {} for v in left_out]
    rows = []
    for it in items:
        lines = it.get("lines") or it.get("first_lines") or ([it["line"]] if it.get("line") is not None else [])
        count = int(it.get("count", len(lines)))
        shown = ", ".join(str(int(v)) for v in lines[:50]) + (" …" if count > min(len(lines), 50) else "")
        rows.append([str(it.get("reason") or "no reason given"), f"{count:,}", shown])
    return rows


def _left_out_html(left_out: Any) -> str:
    """Rows left out, with reasons: a mapping reason → {count, lines or first_lines} (the intake's ``dropped``,
    the model's ``rows_left_out``), or a list of {"lines" or "line", "reason"} (rows left out on purpose)."""
    if not left_out:
        return ""
    return "<h2>Rows left out</h2>" + _table(["reason", "rows", "file lines"], _left_out_rows(left_out))


def html_report(
    info: DatasetInfo,
    view: SplitView,
    dv: DegreeView,
    model: ModelView,
    fit_fig: go.Figure,
    err_fig: go.Figure,
    *,
    read_back: Any = None,
    back_calculation: Any = None,
    left_out: Mapping[str, Any] | Sequence[Mapping[str, Any]] | None = None,
) -> str:
    """A self-contained HTML page: both charts, the numbers, the coefficients, intake and settings.

    Optional sections, shown when given: ``read_back`` (``fitting.read_back`` result or its
    ``to_dict()``: the readings the user read back), ``back_calculation`` (``fitting.back_calculate``
    result or its ``to_dict()``) and ``left_out`` (rows left out with their reasons; see
    ``_left_out_html``).
    """
    e = html.escape
    fit = model.fit
    fit_html = fit_fig.to_html(full_html=False, include_plotlyjs=True, config={"displaylogo": False})
    err_html = err_fig.to_html(full_html=False, include_plotlyjs=False, config={"displaylogo": False})
    coef_rows = _coefficient_rows(model)
    stats_rows = _statistic_rows(view, model)
    warn_html = _warnings_html(list(dv.warnings) + list(fit.warnings))
    when = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    steady = view.steady
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>degreescope report: {e(view.columns.y)} against {e(view.columns.x)}</title>
<style>
{_STYLE}</style></head><body>
<h1>degreescope report</h1>
<p>Dataset <strong>{e(info.name)}</strong>, made {e(when)} by degreescope {e(handover.degreescope_version())}.</p>
<p class="caution">{e(CAUTION_TEXT)}</p>
<h2>Verdict</h2>
<p>Recommended degree: <strong>{steady.recommended_degree}</strong> ({e(steady.recommendation_rule)} rule).
{e(steady.recommendation)}</p>
<p>Shown degree: <strong>{dv.degree}</strong>.</p>
{warn_html}
<h2>Charts</h2>
{fit_html}
{err_html}
<h2>Model</h2>
<p>Fitted on {e(model.fitted_on)}.</p>
<p>Equation: <code>{e(model.equation)}</code></p>
{_table(["term", "coefficient", "standard error", "95 % CI lower", "95 % CI upper", "unit"], coef_rows)}
<p>95 % intervals use Student's t with {fit.dof} degrees of freedom (t = {_fmt(model.t_quantile, 5)}).</p>
{_table(["statistic", "value"], stats_rows)}
{_back_calculation_html(back_calculation)}
{_read_back_html(read_back)}
<h2>Data intake</h2>
<ul>{"".join(f"<li>{e(line)}</li>" for line in info.report_lines)}</ul>
<p>{view.rows_used:,} rows used; {view.rows_dropped:,} rows left out with these columns.</p>
{_left_out_html(left_out)}
<h2>Settings</h2>
{_table(["setting", "value"], settings_rows(view, dv.degree))}
</body></html>
"""
