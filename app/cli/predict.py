"""``degreescope predict MODEL.json``: predictions with confidence and prediction intervals from a saved model.

With ``--from-y`` (or ``--input FILE --y COL``) it reads readings back to x instead (``_readback``).
"""

from __future__ import annotations

import json

from .._atomic import write_text_atomic
from . import _args, _output

HELP = (
    "Predictions with confidence and prediction intervals from a saved model; with --from-y, readings read back "
    "to x with calibration intervals."
)
ROW_KEYS = (
    "x",
    "prediction",
    "confidence_lower",
    "confidence_upper",
    "prediction_lower",
    "prediction_upper",
    "outside_range",
)


def add_parser(sub) -> None:
    p = _args.add_command(sub, "predict", HELP)
    p.add_argument("model", metavar="MODEL.json", help="a model file written by `fit --save-model`")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--at", type=_args.finite_float, nargs="+", metavar="X", help="x values to predict at")
    where.add_argument(
        "--input",
        metavar="FILE",
        help="a table whose x column to predict at (or, with --y or --from-y, whose readings to read back); "
        "- reads standard input",
    )
    p.add_argument(
        "--x",
        metavar="COL",
        help="with --input: the x column (default: the model's x name, else the first numeric column)",
    )
    p.add_argument(
        "--from-y",
        type=_args.reading,
        nargs="*",
        metavar="Y",
        help="read these readings (responses) back to x, with calibration intervals; with --input and no values, "
        "read back the readings of that table",
    )
    p.add_argument(
        "--y",
        metavar="COL",
        help="with --input: the column of readings to read back (default: the model's y name, or the only "
        "numeric column)",
    )
    p.add_argument(
        "--readings",
        type=_args.positive_int,
        default=1,
        metavar="K",
        help="with --from-y: each reading is the mean of K replicate readings (default: 1)",
    )
    p.add_argument(
        "--level", type=_args.finite_float, default=0.95, help="interval level between 0 and 1 (default: 0.95)"
    )
    _args.add_json(p)
    p.add_argument(
        "--output", metavar="PATH.csv", help="also write the predictions (or the read-back rows) to this CSV file"
    )
    _args.add_intake(p)
    p.set_defaults(func=run)


def load_model(path_text: str):
    """The PolynomialFit of a model file; UsageError or FitError (exit 2) for anything else."""
    import fitting

    path = _args.existing_file(path_text, "model file")
    try:
        data = json.loads(path.read_text(encoding="utf-8-sig"))  # a BOM from an editor is harmless
    except UnicodeDecodeError:
        raise _args.UsageError(f"{path_text!r} is not a text (JSON) model file") from None
    except json.JSONDecodeError as exc:
        raise _args.UsageError(f"{path_text!r} is not valid JSON (line {exc.lineno}: {exc.msg})") from None
    except RecursionError:
        raise _args.UsageError(
            f"{path_text!r} is not a degreescope model file (its JSON is nested too deeply)"
        ) from None
    if not isinstance(data, dict):
        raise _args.UsageError(f"{path_text!r} is not a degreescope model file (expected a JSON object)")
    return fitting.PolynomialFit.from_dict(data)


def _x_from_table(args, model, source):
    """The finite x values of ``--input``, the column's name, and how many rows were left out."""
    import numpy as np

    table = _args.read_input(source, args, one_column=True)  # a plain list of x values is a fine input here
    numeric = list(table.report.numeric_columns)
    col = args.x
    if col is None:
        col = model.x_name if model.x_name in numeric else (numeric[0] if numeric else None)
    if col is None:
        raise _args.UsageError(f"{args.input!r} has no numeric column to predict at")
    if col not in numeric:
        where = "has no column" if col not in table.report.columns else "holds text, not numbers, in column"
        raise _args.UsageError(
            f"{args.input!r} {where} {col!r}; numeric columns: {', '.join(repr(c) for c in numeric) or 'none'}"
        )
    xs = table.frame[col].to_numpy(dtype=np.float64)
    keep = np.isfinite(xs)
    if not keep.any():
        raise _args.UsageError(f"the column {col!r} of {args.input!r} holds no numbers to predict at")
    return xs[keep], col, int((~keep).sum())


def _predictions(model, xs, level: float) -> tuple[list[dict], tuple]:
    yhat = model.predict(xs)
    conf = model.band(xs, "confidence", level)
    pred = model.band(xs, "prediction", level)
    outside = model.outside_domain(xs)
    columns = (xs, yhat, conf[0], conf[1], pred[0], pred[1])
    rows = [
        dict(zip(ROW_KEYS, [*(float(c[i]) for c in columns), bool(outside[i])], strict=True)) for i in range(xs.size)
    ]
    return rows, (xs, yhat, conf, pred, outside)


def _warnings(args, model, xs, outside, x_label: str, left_out: int) -> list[str]:
    out = list(model.warnings)
    if left_out:
        out.append(f"{left_out} rows of {args.input!r} have no finite x in {x_label!r} and were left out.")
    n_out = int(outside.sum())
    if n_out:
        out.append(
            f"{n_out} of {xs.size} x values lie outside the fitted x range {model.domain[0]:.6g} to "
            f"{model.domain[1]:.6g}; a polynomial's predictions there are extrapolations and can be far off."
        )
    if model.dof <= 0:
        out.append("The model has no residual degrees of freedom, so its intervals are undefined.")
    return out


def run(args) -> int:
    import numpy as np

    from .. import handover
    from . import _readback  # here: only predict --from-y reads back, and fit and sweep start faster without it

    read_back = _readback.check_mode(args)
    model = load_model(args.model)
    if not (0.0 < args.level < 1.0):
        raise _args.UsageError(f"--level must be between 0 and 1 (e.g. 0.95), not {args.level}")
    inputs = [_args.existing_file(args.model, "model file")]
    if read_back:
        return _readback.run(args, model, inputs)
    if args.at is not None:
        xs, x_label, left_out = np.asarray(args.at, dtype=np.float64), model.x_name or "x", 0
    else:
        source = _args.Source(args.input, "input file")
        xs, x_label, left_out = _x_from_table(args, model, source)
        inputs += [] if source.is_stdin else [source.path]
    rows, (xs, yhat, conf, pred, outside) = _predictions(model, xs, args.level)
    warnings_all = _warnings(args, model, xs, outside, x_label, left_out)
    written = None
    if args.output:
        text = handover.predictions_csv(
            xs, yhat, conf, pred, outside, x_name=x_label, y_name=model.y_name or "y", level=args.level
        )
        written = _output.write_output(args.output, lambda p: write_text_atomic(p, text), inputs=inputs)
    if args.json:
        _emit(args, model, rows, int(outside.sum()), warnings_all, written)
    else:
        _print(args, model, rows, x_label, written)
    _output.warn_all(warnings_all)
    return 0


def _emit(args, model, rows, n_out, warnings_all, written) -> None:
    _output.emit_json(
        {
            "command": "predict",
            "model": args.model,
            "level": args.level,
            "x_name": model.x_name,
            "y_name": model.y_name,
            "domain": list(model.domain),
            "rows": rows,
            "outside_range_count": n_out,
            "warnings": warnings_all,
            "output_file": str(written) if written else None,
        }
    )


def _print(args, model, rows, x_label: str, written) -> None:
    pct = f"{args.level * 100:g} %"
    body = [[r[k] for k in ROW_KEYS[:-1]] + ["OUTSIDE" if r["outside_range"] else ""] for r in rows]
    head = [x_label, "prediction", "conf. lower", "conf. upper", "pred. lower", "pred. upper", "fitted range"]
    lines = [
        f"Predictions of {model.y_name or 'y'} from {args.model} (degree {model.degree}, {pct} intervals)",
        "",
        _output.table(head, body),
    ]
    if written:
        lines += ["", f"Predictions written to {written}"]
    _output.say(*lines)
