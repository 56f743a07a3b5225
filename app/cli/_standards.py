"""What ``degreescope fit`` says about calibration standards: the weighting, back-calculation, weighting choice.

* ``--weighting RULE`` (none, 1/x, 1/x2, 1/y, 1/y2): the weights come from the rule
  (``fitting.weights_for`` with the file's line numbers, so a row where the rule is
  undefined is refused by its line), and the rule is recorded in the model file.
* The back-calculated standards (``fitting.back_calculate``): each standard's y read back
  through the fitted curve, its relative error judged against ``--tolerance`` and
  ``--lowest-tolerance`` (per cent; by default the bioanalytical rule of the FDA 2018
  guidance and ICH M10 for chromatographic assays).
* The weighting comparison (``fitting.compare_weightings``): each named rule fitted and
  ranked by the sum of the standards' absolute relative errors (Almeida, Castel-Branco and
  Falcão, J. Chromatogr. B 774 (2002) 215; journal details from memory).

Both read each standard back with a root search, so they are made for calibration data
(tens to hundreds of standards), not for every row of a large file: above
``STANDARDS_ROW_LIMIT`` rows they are left out with the reason.
"""

from __future__ import annotations

import math
from typing import Any

from .._format import fmt_number
from . import _args, _output

#: above this many rows the back-calculation and the weighting comparison are skipped (with the reason)
STANDARDS_ROW_LIMIT = 2_000
#: at most this many back-calculated standards are printed in the text output (all are in --json)
PRINTED_STANDARDS = 200
RULE_NAME = "FDA 2018 / ICH M10"
RULES = ("none", "1/x", "1/x2", "1/y", "1/y2")


def weighting_rule(text: str) -> str:
    """``--weighting``: a named rule; "1/x^2" and "1/x²" read as "1/x2" (the engine's own spelling)."""
    key = str(text).strip().lower().replace("^2", "2").replace("²", "2").replace(" ", "")
    if key not in RULES:
        import argparse

        raise argparse.ArgumentTypeError(f"expected one of {', '.join(RULES)}, not {text!r}")
    return key


def percent(text: str) -> float:
    """A tolerance in per cent: a finite number above 0."""
    v = _args.finite_float(text)
    if v <= 0:
        import argparse

        raise argparse.ArgumentTypeError(f"expected a percentage above 0, not {text!r}")
    return v


def add_options(p) -> None:
    p.add_argument(
        "--weighting",
        type=weighting_rule,
        metavar="RULE",
        help="weight the standards by a named rule: none, 1/x, 1/x2, 1/y or 1/y2 (not with --weights)",
    )
    p.add_argument(
        "--tolerance",
        type=percent,
        default=15.0,
        metavar="PCT",
        help="back-calculated standards pass within ± this many per cent (default: 15, FDA 2018 / ICH M10)",
    )
    p.add_argument(
        "--lowest-tolerance",
        type=percent,
        default=20.0,
        metavar="PCT",
        help="the same at the lowest non-zero level (default: 20)",
    )


def check_options(args) -> None:
    if args.weighting is not None and args.weights is not None:
        raise _args.UsageError(
            f"--weighting {args.weighting} and --weights {args.weights!r} both set the weights; give one of the two"
        )


def fit_weights(args, rows):
    """The weights the fit uses: the rule's (refused by line where undefined), the column's, or None."""
    import fitting

    if args.weighting is None:
        return rows.weights
    return fitting.weights_for(args.weighting, rows.x, rows.y, rows=rows.lines)


def fit(args, sel, rows):
    """The fit of ``--degree`` on ``rows``: by the ``--weighting`` rule (recorded in the model), else the column."""
    import fitting

    kwargs: dict[str, Any] = dict(
        through_origin=args.through_origin, x_name=sel.x_name, y_name=sel.y_name, x_unit=sel.x_unit, y_unit=sel.y_unit
    )
    if args.weighting is not None:
        return fitting.fit_polynomial(rows.x, rows.y, args.degree, weighting=args.weighting, **kwargs)
    return fitting.fit_polynomial(rows.x, rows.y, args.degree, weights=rows.weights, **kwargs)


def rule_of(fit) -> str:
    """The weighting the model was fitted with: "none", a named rule, or "column"."""
    return str(fit.weighting)


def evaluate(args, fit, x, y, lines) -> dict[str, Any]:
    """``back_calculation`` and ``weighting_comparison`` (engine dicts), or None with the reason for each."""
    import fitting

    out: dict[str, Any] = {
        "back_calculation": None,
        "back_calculation_reason": None,
        "weighting_comparison": None,
        "weighting_comparison_reason": None,
    }
    reason = None
    if fit.degree < 1:
        reason = "a degree-0 fit is a constant: standards cannot be read back through it"
    elif len(x) > STANDARDS_ROW_LIMIT:
        reason = (
            f"the fit has {len(x):,} rows, more than the {STANDARDS_ROW_LIMIT:,} standards this reads back one by one"
        )
    if reason:
        out["back_calculation_reason"] = out["weighting_comparison_reason"] = reason
        return out
    back = fitting.back_calculate(
        fit, x, y, tolerance=args.tolerance, lowest_tolerance=args.lowest_tolerance, lines=lines
    )
    out["back_calculation"] = dict(back.to_dict(), tolerance=args.tolerance, lowest_tolerance=args.lowest_tolerance)
    out["weighting_comparison"] = fitting.compare_weightings(
        x, y, fit.degree, through_origin=fit.through_origin, lines=lines
    ).to_dict()
    return out


def summary_for_provenance(evaluated: dict) -> dict | None:
    """The back-calculation's summary, tolerances and rule, for the model file's provenance."""
    back = evaluated.get("back_calculation")
    if not back:
        return None
    keep = ("summary", "rule", "tolerance", "lowest_tolerance")
    return {k: back[k] for k in keep}


def _pct(v) -> str:
    return "—" if v is None or not math.isfinite(float(v)) else f"{float(v):.4g} %"


def back_lines(back: dict) -> list[str]:
    """The back-calculation table and its summary, as text lines."""
    rows = back["rows"]
    body = [
        [
            r["line"],
            r["x"],
            r["y"],
            r["x_back"],
            fmt_number(r["relative_error_percent"], 4),
            {True: "yes", False: "NO", None: "—"}[r["within_tolerance"]],
            r["note"] or "",
        ]
        for r in rows[:PRINTED_STANDARDS]
    ]
    head = ["line", "x", "y", "x back", "rel. error %", "within", "note"]
    s = back["summary"]
    lines = [
        f"Back-calculated standards (tolerance ±{fmt_number(back['tolerance'], 4)} %, "
        f"±{fmt_number(back['lowest_tolerance'], 4)} % at the lowest level)",
        _output.table(head, body, digits=8, right=(4,)),
    ]
    if len(rows) > PRINTED_STANDARDS:
        lines.append(f"... and {len(rows) - PRINTED_STANDARDS:,} more standards (all of them with --json)")
    verdict = "accepted" if s["accepted"] else "NOT accepted"
    lines += [
        f"{s['standards_passing']} of {s['standards']} standards pass ({_pct(s['share_passing_percent'])}; "
        f"at least {fmt_number(s['min_share_percent'], 4)} % needed), {s['levels_passing']} of {s['levels']} levels "
        f"pass (at least {s['min_levels']} needed): {verdict} by the {RULE_NAME} rule.",
        f"Rule: {back['rule']}",
    ]
    return lines


def comparison_lines(comp: dict) -> list[str]:
    """The weighting comparison, as text lines."""
    body = [
        [
            r["weighting"],
            r["sum_abs_relative_error_percent"],
            r["rank"] if r["rank"] is not None else "—",
            r["note"] or "",
        ]
        for r in comp["rows"]
    ]
    best = comp["best"]
    tail = (
        f"Smallest sum: {best} (the criterion of Almeida, Castel-Branco and Falcão, J. Chromatogr. B 774 (2002) 215)."
        if best
        else "No weighting could be ranked on these data."
    )
    return [
        "Weighting comparison (each rule fitted at this degree; sum of |relative error %| of the standards)",
        _output.table(["weighting", "sum |rel. error| %", "rank", "note"], body, right=(2,)),
        tail,
    ]


def text_lines(evaluated: dict) -> list[str]:
    out: list[str] = []
    if evaluated.get("back_calculation"):
        out += ["", *back_lines(evaluated["back_calculation"])]
    elif evaluated.get("back_calculation_reason"):
        out += ["", f"No back-calculation: {evaluated['back_calculation_reason']}."]
    if evaluated.get("weighting_comparison"):
        out += ["", *comparison_lines(evaluated["weighting_comparison"])]
    return out
