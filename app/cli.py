"""The ``degreescope`` command line.

    degreescope [--debug] serve   [FILE] [--host H] [--port P] [--threads N] [--no-token] ...
    degreescope [--debug] fit     FILE --degree N [--x COL] [--y COL] [--weights COL] ...
    degreescope [--debug] sweep   FILE [--max-degree D] [--folds K | --holdout F] ...
    degreescope [--debug] predict MODEL.json (--at X [X ...] | --input FILE) ...

Exit status: 0 on success; 2 for bad input (a file, a column, an option, data
that cannot carry the fit), with one ``error:`` line on stderr; 1 for an
internal error (``--debug`` prints its traceback); 130 when interrupted.

With ``--json`` exactly one JSON object goes to stdout; NaN and infinity are
written as null. Warnings go to stderr as ``warning:`` lines, and into the
JSON object's ``warnings``.

Only ``serve`` imports dash and plotly. Files the command line writes are
written whole or not at all (``app._atomic``); input files are only read.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import os
import sys
import traceback
import warnings as _warnings
from pathlib import Path
from typing import Any, Sequence

import numpy as np

import fitting
from fitting import DegreescopeError

from ._atomic import write_csv_atomic, write_text_atomic

__all__ = ["main", "build_parser"]

MIB = 1024 * 1024
DEFAULT_SIZE_LIMIT_MB = fitting.DEFAULT_MAX_BYTES // MIB  # the engine's intake limit, 512 MiB
STREAM_ABOVE_BYTES = 64 * MIB
DEFAULT_MAX_DEGREE = 12
SAMPLE = Path(__file__).resolve().parent.parent / "sample_data" / "sensor_calibration.csv"


class UsageError(Exception):
    """Bad arguments: reported as one ``error:`` line, exit status 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message: str):  # argparse prints usage and exits; we raise instead
        raise UsageError(f"{message} (see `{self.prog} --help`)")


# ----------------------------------------------------------------------------
# the parser


def _positive_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, not {text!r}") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number of at least 1, not {text!r}")
    return v


def _nonneg_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, not {text!r}") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"expected a whole number of 0 or more, not {text!r}")
    return v


def _finite_float(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, not {text!r}") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"expected a finite number, not {text!r}")
    return v


MAX_SIZE_LIMIT_MB = 1024 * 1024  # 1 TiB: far above any file this reads into memory


def _size_limit_mb(text: str) -> int:
    v = _positive_int(text)
    if v > MAX_SIZE_LIMIT_MB:
        raise argparse.ArgumentTypeError(f"expected at most {MAX_SIZE_LIMIT_MB} (1 TiB), not {text!r}")
    return v


def _port(text: str) -> int:
    v = _nonneg_int(text)
    if v > 65535:
        raise argparse.ArgumentTypeError(f"a port is 0 to 65535, not {text}")
    return v


def build_parser() -> argparse.ArgumentParser:
    debug_help = "show the full traceback of an internal error (serve: also Dash's debug mode)"
    top = _Parser(
        prog="degreescope",
        description="Fit polynomials to paired measurements, choose the degree by cross-validation, "
        "and hand over a model.",
        epilog="Exit status: 0 success, 2 bad input or arguments, 1 internal error.",
    )
    top.add_argument("--debug", action="store_true", help=debug_help)
    sub = top.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True

    def add(name: str, help_text: str) -> argparse.ArgumentParser:
        p = sub.add_parser(name, help=help_text, description=help_text)
        p.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=debug_help)
        return p

    def intake_options(p: argparse.ArgumentParser) -> None:
        p.add_argument(
            "--size-limit-mb",
            type=_size_limit_mb,
            default=DEFAULT_SIZE_LIMIT_MB,
            metavar="MB",
            help=f"refuse input files larger than this many MiB (default: {DEFAULT_SIZE_LIMIT_MB})",
        )

    # serve
    p = add("serve", "Run the dashboard in a local browser tab.")
    p.add_argument(
        "file", nargs="?", metavar="FILE", help="data to open first (default: the invented sensor calibration sample)"
    )
    p.add_argument("--host", default="127.0.0.1", help="address to bind (default: 127.0.0.1, this machine only)")
    p.add_argument("--port", type=_port, default=8050, help="port (default: 8050; 0 picks a free one)")
    p.add_argument("--threads", type=_positive_int, default=8, help="worker threads (default: 8)")
    p.add_argument(
        "--no-token",
        action="store_true",
        help="do not require the access token on a non-loopback address (anyone who can reach the port can use it)",
    )
    p.add_argument(
        "--allow-host",
        action="append",
        default=[],
        metavar="NAME",
        help="also accept requests addressed to this host name (repeatable); others are refused",
    )
    p.add_argument(
        "--upload-limit-mb", type=_positive_int, default=128, metavar="MB", help="largest upload in MiB (default: 128)"
    )
    p.set_defaults(func=_cmd_serve)

    # fit
    p = add("fit", "Fit one polynomial of a given degree.")
    p.add_argument("file", metavar="FILE", help="CSV (or other table) with the measurements")
    p.add_argument("--degree", type=_nonneg_int, required=True, metavar="N", help="polynomial degree")
    p.add_argument("--x", metavar="COL", help="x column (default: the first numeric column)")
    p.add_argument("--y", metavar="COL", help="y column (default: the next numeric column)")
    p.add_argument("--weights", metavar="COL", help="column of positive weights (1 / variance)")
    p.add_argument("--through-origin", action="store_true", help="no constant term; R² is then uncentered")
    p.add_argument("--json", action="store_true", help="write one JSON object to stdout")
    p.add_argument("--save-model", metavar="PATH", help="write the model file that `predict` reads")
    intake_options(p)
    p.set_defaults(func=_cmd_fit)

    # sweep
    p = add("sweep", "Train and test error for every degree, with a recommended degree.")
    p.add_argument("file", metavar="FILE", help="CSV file, Parquet file, or a folder or glob of Parquet files")
    p.add_argument("--x", metavar="COL", help="x column (default: the first numeric column)")
    p.add_argument("--y", metavar="COL", help="y column (default: the next numeric column)")
    p.add_argument("--weights", metavar="COL", help="column of positive weights (in-memory sweeps only)")
    p.add_argument(
        "--max-degree",
        type=_nonneg_int,
        default=DEFAULT_MAX_DEGREE,
        metavar="D",
        help=f"try degrees 0 to D (default: {DEFAULT_MAX_DEGREE})",
    )
    split = p.add_mutually_exclusive_group()
    split.add_argument("--folds", type=_positive_int, metavar="K", help="K-fold cross-validation (default: 10 folds)")
    split.add_argument(
        "--holdout", type=_finite_float, metavar="FRACTION", help="hold out this fraction instead, e.g. 0.25"
    )
    p.add_argument(
        "--ordered", action="store_true", help="with --holdout: hold out the highest x values (extrapolation check)"
    )
    p.add_argument(
        "--repeats", type=_positive_int, default=1, metavar="R", help="repeat the shuffled split R times (default: 1)"
    )
    p.add_argument("--group", metavar="COL", help="keep rows with the same value here in the same fold (e.g. a batch)")
    p.add_argument(
        "--seed", type=int, default=0, metavar="S", help="shuffle seed; the same seed gives the same split (default: 0)"
    )
    p.add_argument("--json", action="store_true", help="write one JSON object to stdout")
    p.add_argument(
        "--engine",
        choices=("numpy", "dask"),
        default=None,
        help="for large data: read in chunks with numpy, or with dask (default: numpy)",
    )
    p.add_argument("--scheduler", metavar="ADDRESS", help="with --engine dask: a dask.distributed scheduler address")
    intake_options(p)
    p.set_defaults(func=_cmd_sweep)

    # predict
    p = add("predict", "Predictions with confidence and prediction intervals from a saved model.")
    p.add_argument("model", metavar="MODEL.json", help="a model file written by `fit --save-model`")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--at", type=_finite_float, nargs="+", metavar="X", help="x values to predict at")
    where.add_argument("--input", metavar="FILE", help="a table whose x column to predict at")
    p.add_argument(
        "--x",
        metavar="COL",
        help="with --input: the x column (default: the model's x name, else the first numeric column)",
    )
    p.add_argument("--level", type=_finite_float, default=0.95, help="interval level between 0 and 1 (default: 0.95)")
    p.add_argument("--json", action="store_true", help="write one JSON object to stdout")
    p.add_argument("--output", metavar="PATH.csv", help="also write the predictions to this CSV file")
    intake_options(p)
    p.set_defaults(func=_cmd_predict)
    return top


# ----------------------------------------------------------------------------
# output helpers


def _clean(obj: Any) -> Any:
    """JSON-safe copy: numpy scalars and arrays to Python, NaN and infinity to None."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_clean(v) for v in obj.tolist()]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, Path):
        return str(obj)
    return str(obj)


def _emit_json(obj: dict) -> None:
    sys.stdout.write(json.dumps(_clean(obj), allow_nan=False, ensure_ascii=False, indent=2) + "\n")


def _fmt(v: Any, digits: int = 6) -> str:
    if v is None:
        return "—"
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        v = float(v)
        if not math.isfinite(v):
            return "—"
        return f"{v:.{digits}g}"
    return str(v)


def _table(headers: Sequence[str], rows: Sequence[Sequence[Any]], *, digits: int = 6) -> str:
    """A plain aligned text table: text columns to the left, numbers to the right."""
    cells = [[_fmt(v, digits) for v in row] for row in rows]
    numeric = [
        all(isinstance(row[j], (int, float, np.integer, np.floating)) or row[j] is None for row in rows)
        if rows
        else False
        for j in range(len(headers))
    ]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(headers)]

    def line(values):
        return "  ".join(
            v.rjust(w) if numeric[j] else v.ljust(w) for j, (v, w) in enumerate(zip(values, widths, strict=False))
        ).rstrip()

    out = [line(headers), line(["-" * w for w in widths])]
    out += [line(r) for r in cells]
    return "\n".join(out)


def _print(*parts: str) -> None:
    sys.stdout.write("\n".join(parts) + "\n")


def _warn(message: str) -> None:
    sys.stderr.write("warning: " + " ".join(str(message).split()) + "\n")


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


# ----------------------------------------------------------------------------
# reading


def _existing_file(path: str, what: str = "file") -> Path:
    p = Path(path)
    if not p.exists():
        raise UsageError(f"the {what} {path!r} does not exist")
    if p.is_dir():
        raise UsageError(f"{path!r} is a folder, not a {what}")
    if not p.is_file():  # a FIFO, socket or device: reading it could block for ever
        raise UsageError(f"{path!r} is not a regular file; give a {what} on disk")
    return p


def _read(path: Path, args, *, one_column: bool = False) -> Any:
    reader = fitting.read_values if one_column else fitting.read_table
    try:
        return reader(path, max_bytes=int(args.size_limit_mb) * MIB, name=path.name)
    except fitting.FileTooLargeError as exc:
        size = getattr(exc, "size_bytes", None)
        if size is None:
            raise
        raise UsageError(
            f"{path.name!r} is {size:,} bytes, over the {int(args.size_limit_mb):,} MiB size limit; "
            f"split the file, or raise the limit with --size-limit-mb {-(-size // MIB)}"
        ) from None


def _select(table, args, *, weights=None, group=None):
    """x and y by name; a missing one defaults as ``Table.select`` decides (first numeric columns)."""
    return table.select(args.x, args.y, weights=weights, group=group)


def _intake_dict(table, sel) -> dict:
    out: dict[str, Any] = {}
    report = getattr(table, "report", None)
    if report is not None and hasattr(report, "to_dict"):
        out["report"] = report.to_dict()
    if hasattr(sel, "to_dict"):
        out["selection"] = sel.to_dict()
    return out


def _intake_lines(table) -> list[str]:
    report = getattr(table, "report", None)
    if report is not None and hasattr(report, "summary_lines"):
        return [str(s) for s in report.summary_lines()]
    return []


def _label(name: str | None, unit: str | None) -> str:
    name = name or "?"
    return f"{name} ({unit})" if unit and f"({unit})" not in name else name


# ----------------------------------------------------------------------------
# fit


def _cmd_fit(args) -> int:
    path = _existing_file(args.file)
    table = _read(path, args)
    sel = _select(table, args, weights=args.weights)
    fit = fitting.fit_polynomial(
        sel.x,
        sel.y,
        args.degree,
        weights=sel.weights,
        through_origin=args.through_origin,
        x_name=sel.x_name,
        y_name=sel.y_name,
        x_unit=sel.x_unit,
        y_unit=sel.y_unit,
    )
    model = fit.to_dict()
    model["fitted_from"] = {
        "file": path.name,
        "sha256": _sha256(path),
        "x": sel.x_name,
        "y": sel.y_name,
        "weights": args.weights,
        "rows_used": int(sel.rows_used),
        "rows_dropped": int(sel.rows_dropped),
    }
    warnings_all = list(fit.warnings)
    saved = None
    if args.save_model:
        saved = _write_output(
            args.save_model,
            lambda p: write_text_atomic(p, json.dumps(_clean(model), allow_nan=False, indent=2) + "\n"),
            inputs=[path],
        )

    if args.json:
        out = dict(model)
        out.update(
            command="fit",
            file=str(path),
            equation=fit.equation(x=sel.x_name or "x", y=sel.y_name or "y"),
            rows_used=int(sel.rows_used),
            rows_dropped=int(sel.rows_dropped),
            intake=_intake_dict(table, sel),
            warnings=warnings_all,
            model_file=str(saved) if saved else None,
        )
        _emit_json(out)
        for w in warnings_all:
            _warn(w)
        return 0

    names = ["constant"] + [f"x^{k}" if k > 1 else "x" for k in range(1, fit.degree + 1)]
    rows = [
        [names[k], float(c), float(se)]
        for k, (c, se) in enumerate(zip(fit.coefficients, fit.standard_errors, strict=False))
    ]
    if fit.through_origin:
        rows = rows[1:]
    lines = [
        f"Fit of degree {fit.degree}{' through the origin' if fit.through_origin else ''}: "
        f"{_label(sel.y_name, sel.y_unit)} against {_label(sel.x_name, sel.x_unit)}, file {path.name}",
        f"Rows used {sel.rows_used}, dropped {sel.rows_dropped}",
        *[f"  {s}" for s in _intake_lines(table)],
        "",
        fit.equation(x="x", y="y"),
        "",
        _table(["term", "coefficient", "standard error"], rows, digits=10),
        "",
        _table(
            ["statistic", "value"],
            [
                ["residual SD", fit.residual_sd],
                ["R²" + (" (uncentered)" if fit.through_origin else ""), fit.r_squared],
                ["adjusted R²", fit.adjusted_r_squared],
                ["RMSE", fit.rmse],
                ["degrees of freedom", fit.dof],
                ["x range fitted", f"{_fmt(fit.domain[0])} to {_fmt(fit.domain[1])}"],
            ],
            digits=8,
        ),
    ]
    if saved:
        lines += ["", f"Model written to {saved}"]
    _print(*lines)
    for w in warnings_all:
        _warn(w)
    return 0


def _write_output(target: str, writer, *, inputs: Sequence[Path] = ()) -> Path:
    dest = Path(target)
    if dest.is_dir():
        raise UsageError(f"{target!r} is a folder; give a file name to write")
    for src in inputs:  # input files are only ever read
        try:
            same = dest.exists() and os.path.samefile(dest, src)
        except OSError:
            same = False
        if same:
            raise UsageError(f"{target!r} is an input of this command; give another file name to write")
    if not (dest.parent if str(dest.parent) else Path(".")).is_dir():
        raise UsageError(f"cannot write {target!r}: the folder {str(dest.parent)!r} does not exist")
    try:
        writer(dest)
    except OSError as exc:
        raise UsageError(f"cannot write {target!r}: {exc.strerror or exc}") from None
    return dest


# ----------------------------------------------------------------------------
# sweep


def _wants_streaming(args) -> bool:
    f = args.file
    if args.engine == "dask":
        return True
    if any(ch in f for ch in "*?[") and not Path(f).exists():
        return True
    p = Path(f)
    if p.is_dir() or p.suffix.lower() in (".parquet", ".pq"):
        return True
    try:
        return (
            p.is_file() and p.stat().st_size > STREAM_ABOVE_BYTES and p.suffix.lower() in (".csv", ".txt", ".tsv", "")
        )
    except OSError:
        return False


def _progress_printer():
    if not sys.stderr.isatty():
        return None, lambda: None
    state = {"shown": False}

    def progress(done, total):
        state["shown"] = True
        if total:
            sys.stderr.write(f"\rread {int(done):,} of {int(total):,} rows ({100.0 * done / total:.0f} %)")
        else:
            sys.stderr.write(f"\rread {int(done):,} rows")
        sys.stderr.flush()

    def finish():
        if state["shown"]:
            sys.stderr.write("\n")
            sys.stderr.flush()

    return progress, finish


def _cmd_sweep(args) -> int:
    if args.ordered and args.holdout is None:
        raise UsageError("--ordered needs --holdout FRACTION")
    if args.group and args.holdout is not None:
        raise UsageError("--group makes grouped folds; it cannot be combined with --holdout")
    if args.scheduler and args.engine != "dask":
        raise UsageError("--scheduler needs --engine dask")
    degrees = range(0, int(args.max_degree) + 1)
    folds = args.folds if args.folds is not None else 10

    if _wants_streaming(args):
        unsupported = [
            o
            for o, v in (
                ("--weights", args.weights),
                ("--group", args.group),
                ("--ordered", args.ordered),
                ("--repeats", args.repeats != 1),
            )
            if v
        ]
        if unsupported:
            raise UsageError(
                f"{', '.join(unsupported)} {'is' if len(unsupported) == 1 else 'are'} not available when the data are read "
                f"in chunks (Parquet, folders, globs, --engine dask, or CSV files over {STREAM_ABOVE_BYTES // MIB} MiB)"
            )
        try:
            from fitting._stream import sweep_source
        except ImportError:
            raise UsageError(
                "streaming support is not available in this build (needed for Parquet files, folders, globs, "
                f"--engine dask and CSV files over {STREAM_ABOVE_BYTES // MIB} MiB)"
            ) from None
        if not any(ch in args.file for ch in "*?[") and not Path(args.file).exists():
            raise UsageError(f"the file {args.file!r} does not exist")
        progress, finish = _progress_printer()
        try:
            sweep, report = sweep_source(
                args.file,
                x=args.x,
                y=args.y,
                degrees=degrees,
                folds=folds,
                holdout=args.holdout,
                seed=args.seed,
                engine=args.engine or "numpy",
                scheduler=args.scheduler,
                progress=progress,
            )
        finally:
            finish()
        rows_used = int(report.get("rows_used", sweep.rows_used))
        rows_dropped = int(report.get("rows_dropped", 0))
        intake = {"streamed": _clean(report)}
        pieces = report.get("chunks", report.get("partitions", "?"))
        intake_lines = [
            f"Read {report.get('rows_read', rows_used + rows_dropped)} rows in {pieces} "
            f"{'partitions' if 'partitions' in report else 'chunks'} with the {report.get('engine', 'numpy')} engine "
            f"({report.get('format', '')}, {report.get('files', 1)} file(s))."
        ]
        x_name, y_name = report.get("x"), report.get("y")
    else:
        path = _existing_file(args.file)
        table = _read(path, args)
        sel = _select(table, args, weights=args.weights, group=args.group)
        if args.group:
            if sel.group is None:
                raise UsageError(f"the group column {args.group!r} gave no labels")
            folds = np.asarray(sel.group)
        sweep = fitting.sweep_degrees(
            sel.x,
            sel.y,
            degrees=degrees,
            folds=folds,
            holdout=args.holdout,
            ordered=args.ordered,
            repeats=args.repeats,
            seed=args.seed,
            weights=sel.weights,
        )
        rows_used, rows_dropped = int(sel.rows_used), int(sel.rows_dropped)
        intake = _intake_dict(table, sel)
        intake_lines = _intake_lines(table)
        x_name, y_name = sel.x_name, sel.y_name

    d = sweep.to_dict()
    d.update(
        command="sweep",
        file=args.file,
        x=x_name,
        y=y_name,
        rows_used=rows_used,
        rows_dropped=rows_dropped,
        intake=intake,
    )
    warnings_all = list(d.get("warnings", []))
    if args.json:
        _emit_json(d)
        for w in warnings_all:
            _warn(w)
        return 0

    se = d["test_rmse_se"]
    rows = []
    for i, deg in enumerate(d["degrees"]):
        mark = []
        if deg == d["recommended_degree"]:
            mark.append("recommended")
        if d["overfitting_from"] is not None and deg >= d["overfitting_from"]:
            mark.append("overfitting")
        rows.append([deg, d["train_rmse"][i], d["test_rmse"][i], None if se is None else se[i], ", ".join(mark)])
    lines = [
        f"Degree sweep: {y_name or 'y'} against {x_name or 'x'}, file {args.file}",
        f"Scheme: {d.get('scheme', '')}",
        f"Rows used {rows_used}, dropped {rows_dropped}",
        *[f"  {s}" for s in intake_lines],
        "",
        _table(["degree", "train RMSE", "test RMSE", "test RMSE SE", "note"], rows),
        "",
        f"Recommended degree: {d['recommended_degree']} ({d['recommendation_rule']})",
    ]
    if d.get("recommendation"):
        lines.append(str(d["recommendation"]))
    if d["overfitting_from"] is not None:
        lines.append(f"Overfitting from degree {d['overfitting_from']}.")
    for deg, why in (d.get("failed_degrees") or {}).items():
        lines.append(f"Degree {deg} failed: {why}")
    _print(*lines)
    for w in warnings_all:
        _warn(w)
    return 0


# ----------------------------------------------------------------------------
# predict


def _load_model(path_text: str):
    path = _existing_file(path_text, "model file")
    try:
        raw = path.read_text(encoding="utf-8-sig")  # a BOM from an editor is harmless
        data = json.loads(raw)
    except UnicodeDecodeError:
        raise UsageError(f"{path_text!r} is not a text (JSON) model file") from None
    except json.JSONDecodeError as exc:
        raise UsageError(f"{path_text!r} is not valid JSON (line {exc.lineno}: {exc.msg})") from None
    except RecursionError:
        raise UsageError(f"{path_text!r} is not a degreescope model file (its JSON is nested too deeply)") from None
    if not isinstance(data, dict):
        raise UsageError(f"{path_text!r} is not a degreescope model file (expected a JSON object)")
    return fitting.PolynomialFit.from_dict(data)


def _predict_x_from_table(args, model) -> tuple[np.ndarray, str, int]:
    """The x values of ``--input`` (numeric column), the column name, and how many rows were left out."""
    path = _existing_file(args.input, "input file")
    table = _read(path, args, one_column=True)  # a plain list of x values is a fine input here
    numeric = list(table.report.numeric_columns)
    col = args.x
    if col is None:
        col = model.x_name if model.x_name in numeric else (numeric[0] if numeric else None)
    if col is None:
        raise UsageError(f"{args.input!r} has no numeric column to predict at")
    if col not in numeric:
        where = "has no column" if col not in table.report.columns else "holds text, not numbers, in column"
        raise UsageError(
            f"{args.input!r} {where} {col!r}; numeric columns: {', '.join(repr(c) for c in numeric) or 'none'}"
        )
    xs = table.frame[col].to_numpy(dtype=np.float64)
    keep = np.isfinite(xs)
    return xs[keep], col, int((~keep).sum())


def _cmd_predict(args) -> int:
    model = _load_model(args.model)
    if not (0.0 < args.level < 1.0):
        raise UsageError(f"--level must be between 0 and 1 (e.g. 0.95), not {args.level}")
    if args.at is not None:
        xs = np.asarray(args.at, dtype=np.float64)
        x_label = model.x_name or "x"
        left_out = 0
    else:
        xs, x_label, left_out = _predict_x_from_table(args, model)
        if xs.size == 0:
            raise UsageError(f"the column {x_label!r} of {args.input!r} holds no numbers to predict at")
    yhat = model.predict(xs)
    c_lo, c_hi = model.band(xs, "confidence", args.level)
    p_lo, p_hi = model.band(xs, "prediction", args.level)
    outside = model.outside_domain(xs)
    rows = [
        {
            "x": float(xs[i]),
            "prediction": float(yhat[i]),
            "confidence_lower": float(c_lo[i]),
            "confidence_upper": float(c_hi[i]),
            "prediction_lower": float(p_lo[i]),
            "prediction_upper": float(p_hi[i]),
            "outside_range": bool(outside[i]),
        }
        for i in range(xs.size)
    ]
    warnings_all = list(model.warnings)
    if left_out:
        warnings_all.append(f"{left_out} rows of {args.input!r} have no finite x in {x_label!r} and were left out.")
    n_out = int(outside.sum())
    if n_out:
        warnings_all.append(
            f"{n_out} of {xs.size} x values lie outside the fitted x range {model.domain[0]:.6g} to {model.domain[1]:.6g}; "
            "a polynomial's predictions there are extrapolations and can be far off."
        )
    if model.dof <= 0:
        warnings_all.append("The model has no residual degrees of freedom, so its intervals are undefined.")
    written = None
    if args.output:
        pct = f"{args.level * 100:g}%"
        header = [
            x_label,
            "prediction",
            f"confidence lower {pct}",
            f"confidence upper {pct}",
            f"prediction lower {pct}",
            f"prediction upper {pct}",
            "outside fitted range",
        ]

        def cell(v):  # numbers stay numbers (csv writes repr); undefined ones become empty cells
            return "" if isinstance(v, float) and not math.isfinite(v) else v

        body = [
            [
                cell(r["x"]),
                cell(r["prediction"]),
                cell(r["confidence_lower"]),
                cell(r["confidence_upper"]),
                cell(r["prediction_lower"]),
                cell(r["prediction_upper"]),
                "yes" if r["outside_range"] else "no",
            ]
            for r in rows
        ]
        inputs = [Path(args.model)] + ([Path(args.input)] if args.input else [])
        written = _write_output(args.output, lambda p: write_csv_atomic(p, header, body), inputs=inputs)

    if args.json:
        _emit_json(
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
    else:
        pct = f"{args.level * 100:g} %"
        table_rows = [
            [
                r["x"],
                r["prediction"],
                r["confidence_lower"],
                r["confidence_upper"],
                r["prediction_lower"],
                r["prediction_upper"],
                "OUTSIDE" if r["outside_range"] else "",
            ]
            for r in rows
        ]
        lines = [
            f"Predictions of {model.y_name or 'y'} from {args.model} (degree {model.degree}, {pct} intervals)",
            "",
            _table(
                [x_label, "prediction", "conf. lower", "conf. upper", "pred. lower", "pred. upper", "fitted range"],
                table_rows,
            ),
        ]
        if written:
            lines += ["", f"Predictions written to {written}"]
        _print(*lines)
    for w in warnings_all:
        _warn(w)
    return 0


# ----------------------------------------------------------------------------
# serve


def _cmd_serve(args) -> int:
    data_path = None
    if args.file is not None:
        data_path = str(_existing_file(args.file))
    elif SAMPLE.is_file():
        data_path = str(SAMPLE)
    from .server import serve  # imports dash and plotly (only this command does)

    try:
        serve(
            data_path,
            host=args.host,
            port=args.port,
            threads=args.threads,
            debug=bool(getattr(args, "debug", False)),
            token=None if args.no_token else "auto",
            upload_limit_bytes=int(args.upload_limit_mb) * MIB,
            allowed_hosts=args.allow_host,
        )
    except OSError as exc:
        raise UsageError(f"cannot listen on {args.host}:{args.port}: {exc.strerror or exc}") from None
    return 0


# ----------------------------------------------------------------------------
# entry point


def _one_line(text: str) -> str:
    return " ".join(str(text).split()) or "(no message)"


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    parser = build_parser()
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        try:
            args = parser.parse_args(argv)
            debug = bool(getattr(args, "debug", debug))
            code = int(args.func(args) or 0)
        except UsageError as exc:
            sys.stderr.write(f"error: {_one_line(exc)}\n")
            return 2
        except DegreescopeError as exc:
            sys.stderr.write(f"error: {_one_line(exc)}\n")
            return 2
        except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
            name = f" {exc.filename!r}" if getattr(exc, "filename", None) else ""
            sys.stderr.write(f"error: cannot read{name}: {_one_line(exc.strerror or exc)}\n")
            return 2
        except KeyboardInterrupt:
            sys.stderr.write("error: interrupted\n")
            return 130
        except BrokenPipeError:
            try:
                sys.stdout = open(os.devnull, "w")  # the reader went away; stay quiet on exit
            except OSError:
                pass
            return 1
        except SystemExit as exc:  # --help and --version print and exit 0
            return int(exc.code or 0) if isinstance(exc.code, int) else 0
        except Exception as exc:  # noqa: BLE001 - the boundary for unexpected errors
            if debug:
                traceback.print_exc(file=sys.stderr)
            sys.stderr.write(
                f"error: internal error ({type(exc).__name__}: {_one_line(exc)[:300]}); "
                "run again with --debug to see the traceback, and please report it\n"
            )
            return 1
    seen: set[str] = set()
    for w in caught:
        msg = _one_line(w.message)
        if msg not in seen and not issubclass(w.category, (DeprecationWarning, PendingDeprecationWarning)):
            seen.add(msg)
            if debug:
                _warn(msg)
    return code


if __name__ == "__main__":
    sys.exit(main())
