"""What a user takes away: a self-contained HTML report, the model JSON, a predictions CSV.

* CSV cells that a spreadsheet could read as a formula (they begin with ``=``, ``+``,
  ``-``, ``@``, a tab or a carriage return) are prefixed with a single quote, as the
  OWASP guidance on CSV injection advises. Text from the uploaded file (column names)
  is the risk; numbers are written as plain numbers and are not touched, except a
  negative number's leading minus, which the rule covers as well (so a negative value
  reads ``'-1.5`` in a spreadsheet; the JSON model keeps full numbers).
* The HTML report inlines plotly's JavaScript (it opens offline) and escapes every
  piece of text that came from the file.
"""

from __future__ import annotations

import csv
import html
import io
import json
import math
from datetime import datetime, timezone
from typing import Any, Iterable

import numpy as np
import plotly.graph_objects as go

from ._atomic import neutralise_cell as _neutralise_text
from .service import DatasetInfo, DegreeView, ModelView, PredictionView, SplitView

__all__ = ["neutralise_cell", "predictions_csv", "model_json", "html_report", "CAUTION_TEXT"]


CAUTION_TEXT = (
    "Polynomial fits are unreliable outside the range of the data they were fitted on. "
    "A calibration used for safety-, health- or legally relevant measurement must follow the applicable "
    "standards and local procedures; this tool does not replace them."
)


def neutralise_cell(value: Any) -> str:
    """A CSV cell as text.

    Numbers are written as plain numbers: a value such as -1.5 is a number to
    every spreadsheet, not a formula. Text goes through the shared rule in
    ``app._atomic.neutralise_cell`` (OWASP CSV injection guidance: a leading
    single quote when it begins with = + - @, tab or CR).
    """
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return repr(float(value)) if math.isfinite(float(value)) else ""
    return _neutralise_text(str(value))


def _write_csv(rows: Iterable[Iterable[Any]]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    for row in rows:
        w.writerow([neutralise_cell(v) for v in row])
    return buf.getvalue()


def predictions_csv(pred: PredictionView, *, x_name: str, y_name: str, y_observed=None) -> str:
    """Predictions with 95 % confidence and prediction intervals, one row per x."""
    header = [x_name]
    if y_observed is not None:
        header += [f"{y_name} (observed)"]
    header += [
        f"{y_name} (fitted)",
        "confidence 95% lower",
        "confidence 95% upper",
        "prediction 95% lower",
        "prediction 95% upper",
        "outside data range",
    ]

    def rows():
        yield header
        for i in range(pred.x.size):
            row = [float(pred.x[i])]
            if y_observed is not None:
                row.append(float(y_observed[i]))
            row += [
                float(pred.y[i]),
                float(pred.conf_lo[i]),
                float(pred.conf_hi[i]),
                float(pred.pred_lo[i]),
                float(pred.pred_hi[i]),
                bool(pred.outside[i]),
            ]
            yield row

    return _write_csv(rows())


def _json_safe(obj):
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_json_safe(v) for v in obj]
    return obj


def model_json(fit) -> str:
    """``PolynomialFit.to_dict()`` as strict JSON (non-finite numbers become null)."""
    return json.dumps(_json_safe(fit.to_dict()), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def _fmt(v, digits=6) -> str:
    try:
        v = float(v)
    except (TypeError, ValueError):
        return "—"
    return f"{v:.{digits}g}" if math.isfinite(v) else "—"


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
    coef_rows = [
        [r["term"], _fmt(r["coefficient"], 10), _fmt(r["se"], 4), _fmt(r["ci_lo"], 8), _fmt(r["ci_hi"], 8), r["unit"]]
        for r in model.coefficient_rows
    ]
    stats_rows = [
        ["R² (fit)", _fmt(fit.r_squared, 8)],
        ["adjusted R² (fit)", _fmt(fit.adjusted_r_squared, 8)],
        ["RMSE (fit rows)", _fmt(fit.rmse, 6)],
        ["residual SD", _fmt(fit.residual_sd, 6)],
        [
            "test RMSE (" + view.split_label + ")",
            _fmt(model.test_rmse, 6)
            + (f" ± {_fmt(model.test_rmse_se, 3)}" if math.isfinite(model.test_rmse_se) else ""),
        ],
        ["test R²", _fmt(model.test_r2, 8)],
        ["rows in the fit", f"{fit.n:,}"],
        ["degrees of freedom", str(fit.dof)],
        ["condition number (mapped x)", _fmt(fit.condition_number, 3)],
        ["x range of the fit", f"{_fmt(fit.domain[0])} to {_fmt(fit.domain[1])}"],
    ]
    warnings = list(dv.warnings) + list(fit.warnings)
    warn_html = (
        "<div class='warn'><strong>Warnings at this degree</strong><ul>"
        + "".join(f"<li>{e(w)}</li>" for w in warnings)
        + "</ul></div>"
        if warnings
        else "<p>No warning stands at this degree.</p>"
    )
    when = datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    steady = view.steady
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>degreescope report: {e(view.columns.y)} against {e(view.columns.x)}</title>
<style>
body {{ font-family: "Source Sans 3", "Segoe UI", "Noto Sans", Arial, sans-serif; color: #1c2a35;
       background: #f5f2ea; margin: 0; padding: 24px 40px; max-width: 1150px; }}
h1 {{ font-size: 24px; margin: 0 0 4px; }} h2 {{ font-size: 18px; border-bottom: 2px solid #d9730d; padding-bottom: 3px; }}
table {{ border-collapse: collapse; margin: 8px 0 16px; background: #fff; }}
td, th {{ border: 1px solid #d9d4c7; padding: 4px 10px; text-align: left; font-variant-numeric: tabular-nums; }}
th {{ background: #ece7da; }} .warn {{ background: #fff1e0; border-left: 5px solid #b8002e; padding: 6px 14px; }}
.caution {{ background: #eef3f7; border-left: 5px solid #2a5d8f; padding: 8px 14px; }}
code {{ background: #fff; padding: 2px 6px; border: 1px solid #d9d4c7; }}
</style></head><body>
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
