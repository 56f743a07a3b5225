"""``degreescope fit FILE --degree N``: one polynomial, its coefficients and statistics, and the model file."""

from __future__ import annotations

from .._atomic import write_text_atomic
from .._format import fmt_number, fmt_r2, label_with_unit, term_name, zero_scale
from . import _args, _data, _evidence, _output, _standards

HELP = "Fit one polynomial of a given degree."


def add_parser(sub) -> None:
    p = _args.add_command(sub, "fit", HELP)
    p.add_argument("file", metavar="FILE", help="CSV (or other table) with the measurements; - reads standard input")
    p.add_argument("--degree", type=_args.nonneg_int, required=True, metavar="N", help="polynomial degree")
    _args.add_columns(p, weights_help="column of positive weights (1 / variance)")
    _standards.add_options(p)
    p.add_argument("--through-origin", action="store_true", help="no constant term; R² is then uncentered")
    _data.add_exclusions(p)
    _args.add_json(p)
    p.add_argument("--save-model", metavar="PATH", help="write the model file that `predict` reads")
    _args.add_intake(p)
    p.set_defaults(func=run)


def _provenance(source, sel, rows) -> dict:
    from .. import handover

    return handover.provenance(
        file_name=source.name,
        sha256=source.sha256(),
        x=sel.x_name,
        y=sel.y_name,
        weights=sel.weights_name,
        rows_used=rows.rows_used,
        rows_dropped=sel.rows_dropped,
        dropped=sel.dropped,
        excluded=rows.excluded,
    )


def run(args) -> int:
    from .. import handover

    _data.check_distinct_columns(args)
    _standards.check_options(args)
    _data.check_exclusions(args)
    source = _args.Source(args.file)
    table = _args.read_input(source, args)
    sel = table.select(args.x, args.y, weights=args.weights)
    _data.check_selection(sel)
    rows = _data.apply_exclusions(args, table, sel, source.name)
    weights = _standards.fit_weights(args, rows)  # before the fit: undefined rows are refused by line
    fit = _standards.fit(args, sel, rows)
    evaluated = _standards.evaluate(args, fit, rows.x, rows.y, rows.lines)
    evaluated.update(_evidence.for_fit(fit, rows, weights))
    fitted_from = _provenance(source, sel, rows)
    summary = _standards.summary_for_provenance(evaluated)
    model = handover.model_document(fit, fitted_from, back_calculation=summary)
    plain = handover.plain_rmse(fit, rows.x, rows.y)
    warnings_all = list(fit.warnings)
    saved = None
    if args.save_model:
        inputs = [] if source.is_stdin else [source.path]
        text = handover.model_json(fit, fitted_from, back_calculation=summary)
        saved = _output.write_output(args.save_model, lambda p: write_text_atomic(p, text), inputs=inputs)
    if args.json:
        _emit(args, source, table, sel, rows, fit, model, plain, saved, evaluated, warnings_all)
    else:
        _print(source, table, sel, rows, fit, plain, saved, evaluated)
    _output.warn_all(warnings_all)
    return 0


def _emit(args, source, table, sel, rows, fit, model, plain, saved, evaluated, warnings_all) -> None:
    out = dict(model)
    out.setdefault("plain_rmse", plain)
    out.setdefault("weighting", _standards.rule_of(fit))
    out.update(
        command="fit",
        file=str(source.path) if source.path else args.file,
        equation=fit.equation(x=sel.x_name or "x", y=sel.y_name or "y"),
        rows_used=int(rows.rows_used),
        rows_dropped=int(sel.rows_dropped),
        rows_excluded=rows.excluded,
        intake=_data.intake_dict(table, sel),
        warnings=warnings_all,
        model_file=str(saved) if saved else None,
    )
    out.update(evaluated)
    _output.emit_json(out)


def coefficient_rows(fit) -> list[list]:
    """(term, coefficient, standard error) rows, the constant first; none for the constant through the origin."""
    rows = [
        [term_name(k), float(c), float(se)]
        for k, (c, se) in enumerate(zip(fit.coefficients, fit.standard_errors, strict=True))
    ]
    return rows[1:] if fit.through_origin else rows


def statistic_rows(fit, sel, plain: float) -> list[list[str]]:
    """The fit's statistics as (label, text); weighted figures say so, and the units are y's."""
    tiny = zero_scale(sel.y)
    unit = sel.y_unit or "y units"
    r2 = "R²" + (" (uncentered)" if fit.through_origin else "")
    if fit.weighted:
        spread = [
            ["residual SD, weighted (divides by n − p)", fmt_number(fit.residual_sd, 8, zero_below=tiny)],
            ["weighted RMSE (weights × residual², divides by Σ weights)", fmt_number(fit.rmse, 8, zero_below=tiny)],
            [f"RMSE, unweighted (in {unit})", fmt_number(plain, 8, zero_below=tiny)],
        ]
    else:
        spread = [
            [f"residual SD (divides by n − p; in {unit})", fmt_number(fit.residual_sd, 8, zero_below=tiny)],
            [f"RMSE (divides by n; in {unit})", fmt_number(fit.rmse, 8, zero_below=tiny)],
        ]
    return spread + [
        [r2, fmt_r2(fit.r_squared, 6)],
        ["adjusted R²", fmt_r2(fit.adjusted_r_squared, 6)],
        ["degrees of freedom", str(fit.dof)],
        ["x range fitted", f"{fmt_number(fit.domain[0], 6)} to {fmt_number(fit.domain[1], 6)}"],
    ]


def _print(source, table, sel, rows, fit, plain, saved, evaluated) -> None:
    origin = " through the origin" if fit.through_origin else ""
    weighting = {"none": "", "column": f", weights column {sel.weights_name!r}"}.get(
        fit.weighting, f", weighting {fit.weighting}"
    )
    lines = [
        f"Fit of degree {fit.degree}{origin}{weighting}: {label_with_unit(sel.y_name, sel.y_unit)} against "
        f"{label_with_unit(sel.x_name, sel.x_unit)}, file {source.name}",
        f"Rows used {rows.rows_used}, dropped {sel.rows_dropped}",
        *[f"  {s}" for s in _data.intake_lines(table, sel) + _data.exclusion_lines(rows)],
        "",
        fit.equation(x="x", y="y"),
        "",
        _output.table(["term", "coefficient", "standard error"], coefficient_rows(fit), digits=10),
        "",
        _output.table(["statistic", "value"], statistic_rows(fit, sel, plain), right=(1,)),
        *_standards.text_lines(evaluated),
        *_evidence.fit_text_lines(evaluated),
    ]
    if saved:
        lines += ["", f"Model written to {saved}"]
    _output.say(*lines)
