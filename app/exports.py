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
from typing import Any

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


def html_report(
    info: DatasetInfo,
    view: SplitView,
    dv: DegreeView,
    model: ModelView,
    fit_fig: go.Figure,
    err_fig: go.Figure,
) -> str:
    """A self-contained HTML page: both charts, the numbers, the coefficients, intake and settings."""
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
<p>Dataset <strong>{e(info.name)}</strong>, made {e(when)}.</p>
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
<h2>Data intake</h2>
<ul>{"".join(f"<li>{e(line)}</li>" for line in info.report_lines)}</ul>
<p>{view.rows_used:,} rows used; {view.rows_dropped:,} rows left out with these columns.</p>
<h2>Settings</h2>
{_table(["setting", "value"], settings_rows(view, dv.degree))}
</body></html>
"""
