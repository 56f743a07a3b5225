"""``degreescope sweep FILE``: train and test error for every degree, and the recommended degree.

Small tables are swept in memory (``fitting.sweep_degrees``). Parquet files, folders
and globs of Parquet files, CSV files over ``STREAM_ABOVE_BYTES`` and ``--engine dask``
are read in chunks (``fitting.sweep_source``).
"""

from __future__ import annotations

import sys
from pathlib import Path

from .._format import fmt_number, label_with_unit, zero_scale
from . import _args, _data, _output

HELP = "Train and test error for every degree, with a recommended degree."
DEFAULT_MAX_DEGREE = 12
DEFAULT_FOLDS = 10
STREAM_ABOVE_BYTES = 64 * _args.MIB
PARQUET_SUFFIXES = (".parquet", ".pq", ".parq")
CSV_SUFFIXES = (".csv", ".txt", ".tsv", "")


def add_parser(sub) -> None:
    p = _args.add_command(sub, "sweep", HELP)
    p.add_argument(
        "file", metavar="FILE", help="CSV file, Parquet file, a folder or glob of Parquet files; - reads standard input"
    )
    _args.add_columns(p, weights_help="column of positive weights (in-memory sweeps only)")
    p.add_argument(
        "--max-degree",
        type=_args.nonneg_int,
        default=DEFAULT_MAX_DEGREE,
        metavar="D",
        help=f"try degrees 0 to D (default: {DEFAULT_MAX_DEGREE})",
    )
    split = p.add_mutually_exclusive_group()
    split.add_argument(
        "--folds",
        type=_args.positive_int,
        metavar="K",
        help=f"K-fold cross-validation (default: {DEFAULT_FOLDS} folds)",
    )
    split.add_argument(
        "--holdout", type=_args.finite_float, metavar="FRACTION", help="hold out this fraction instead, e.g. 0.25"
    )
    p.add_argument(
        "--ordered", action="store_true", help="with --holdout: hold out the highest x values (extrapolation check)"
    )
    p.add_argument(
        "--repeats", type=_args.positive_int, default=1, metavar="R", help="repeat the shuffled split R times"
    )
    p.add_argument(
        "--group", metavar="COL", help="one fold per value of this column (e.g. a batch); not with --folds or --holdout"
    )
    p.add_argument(
        "--seed", type=int, default=0, metavar="S", help="shuffle seed; the same seed gives the same split (default: 0)"
    )
    _args.add_json(p)
    p.add_argument(
        "--engine",
        choices=("numpy", "dask"),
        default=None,
        help="for large data: read in chunks with numpy, or with dask (default: numpy)",
    )
    p.add_argument("--scheduler", metavar="ADDRESS", help="with --engine dask: a dask.distributed scheduler address")
    _args.add_intake(p)
    p.set_defaults(func=run)


def _check(args) -> None:
    if args.ordered and args.holdout is None:
        raise _args.UsageError("--ordered needs --holdout FRACTION")
    if args.group and args.holdout is not None:
        raise _args.UsageError("--group makes grouped folds; it cannot be combined with --holdout")
    if args.group and args.folds is not None:
        raise _args.UsageError(
            f"--group makes one fold per value of {args.group!r}, so --folds {args.folds} would be ignored; "
            "give one of the two"
        )
    if args.scheduler and args.engine != "dask":
        raise _args.UsageError("--scheduler needs --engine dask")
    _data.check_distinct_columns(args)


def wants_streaming(args) -> bool:
    """True when the sweep reads in chunks instead of in memory."""
    f = args.file
    if args.engine == "dask":
        return True
    if f == _args.STDIN:
        return False
    if any(ch in f for ch in "*?[") and not Path(f).exists():
        return True
    p = Path(f)
    if p.is_dir() or p.suffix.lower() in PARQUET_SUFFIXES:
        return True
    try:
        return p.is_file() and p.stat().st_size > STREAM_ABOVE_BYTES and p.suffix.lower() in CSV_SUFFIXES
    except OSError:
        return False


def run(args) -> int:
    _check(args)
    degrees = range(0, int(args.max_degree) + 1)
    if wants_streaming(args):
        sweep, info = _sweep_streamed(args, degrees)
    else:
        sweep, info = _sweep_in_memory(args, degrees)
    d = sweep.to_dict()
    d.update(
        command="sweep",
        file=args.file,
        x=info["x"],
        y=info["y"],
        rows_used=info["rows_used"],
        rows_dropped=info["rows_dropped"],
        intake=info["intake"],
    )
    if args.json:
        _output.emit_json(d)
    else:
        _print(args, d, info)
    _output.warn_all(d.get("warnings", []))
    return 0


def _refuse_unstreamable(args) -> None:
    unsupported = [
        o
        for o, v in (
            ("--weights", args.weights),
            ("--group", args.group),
            ("--ordered", args.ordered),
            ("--repeats", args.repeats != 1),
            ("--sheet", args.sheet is not None),
        )
        if v
    ]
    if unsupported:
        verb = "is" if len(unsupported) == 1 else "are"
        raise _args.UsageError(
            f"{', '.join(unsupported)} {verb} not available when the data are read in chunks (Parquet, folders, "
            f"globs, --engine dask, or CSV files over {STREAM_ABOVE_BYTES // _args.MIB} MiB)"
        )
    if not any(ch in args.file for ch in "*?[") and not Path(args.file).exists():
        raise _args.UsageError(f"the file {args.file!r} does not exist")


def _sweep_streamed(args, degrees):
    import fitting

    _refuse_unstreamable(args)
    progress, finish = _progress_printer()
    try:
        sweep, report = fitting.sweep_source(
            args.file,
            x=args.x,
            y=args.y,
            degrees=degrees,
            folds=args.folds if args.folds is not None else DEFAULT_FOLDS,
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
    pieces = report.get("chunks", report.get("partitions", "?"))
    line = (
        f"Read {report.get('rows_read', rows_used + rows_dropped)} rows in {pieces} "
        f"{'partitions' if 'partitions' in report else 'chunks'} with the {report.get('engine', 'numpy')} engine "
        f"({report.get('format', '')}, {report.get('files', 1)} file(s))."
    )
    info = {"x": report.get("x"), "y": report.get("y"), "x_unit": None, "y_unit": None, "y_values": ()}
    info.update(rows_used=rows_used, rows_dropped=rows_dropped, intake={"streamed": report}, lines=[line])
    return sweep, info


def _sweep_in_memory(args, degrees):
    import fitting

    source = _args.Source(args.file)
    table = _args.read_input(source, args)
    sel = table.select(args.x, args.y, weights=args.weights, group=args.group)
    _data.check_selection(sel, args.group)
    folds = args.folds if args.folds is not None else DEFAULT_FOLDS
    if args.group:
        if sel.group is None:
            raise _args.UsageError(f"the group column {args.group!r} gave no labels")
        folds = sel.group
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
    info = {"x": sel.x_name, "y": sel.y_name, "x_unit": sel.x_unit, "y_unit": sel.y_unit, "y_values": sel.y}
    info.update(rows_used=int(sel.rows_used), rows_dropped=int(sel.rows_dropped))
    info.update(intake=_data.intake_dict(table, sel), lines=_data.intake_lines(table, sel), source=source.name)
    return sweep, info


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


def _rows(d: dict, tiny: float) -> list[list]:
    se = d["test_rmse_se"]
    rows = []
    for i, deg in enumerate(d["degrees"]):
        mark = []
        if deg == d["recommended_degree"]:
            mark.append("recommended")
        if d["overfitting_from"] is not None and deg >= d["overfitting_from"]:
            mark.append("overfitting")
        cells = [d["train_rmse"][i], d["test_rmse"][i], None if se is None else se[i]]
        rows.append([deg, *[fmt_number(v, 6, zero_below=tiny) for v in cells], ", ".join(mark)])
    return rows


def _print(args, d: dict, info: dict) -> None:
    tiny = zero_scale(info["y_values"])
    y_label, x_label = (
        label_with_unit(info["y"] or "y", info["y_unit"]),
        label_with_unit(info["x"] or "x", info["x_unit"]),
    )
    weighted = " (weighted)" if args.weights else ""
    lines = [
        f"Degree sweep: {y_label} against {x_label}, file {info.get('source', args.file)}",
        f"Scheme: {d.get('scheme', '')}",
        f"Rows used {info['rows_used']}, dropped {info['rows_dropped']}",
        *[f"  {s}" for s in info["lines"]],
        "",
        _output.table(
            ["degree", f"train RMSE{weighted}", f"test RMSE{weighted}", "test RMSE SE", "note"],
            _rows(d, tiny),
            right=(1, 2, 3),
        ),
        "",
        f"Recommended degree: {d['recommended_degree']} ({d['recommendation_rule']})",
    ]
    if d.get("recommendation"):
        lines.append(str(d["recommendation"]))
    if d["overfitting_from"] is not None:
        lines.append(f"Overfitting from degree {d['overfitting_from']}.")
    for deg, why in (d.get("failed_degrees") or {}).items():
        lines.append(f"Degree {deg} failed: {why}")
    _output.say(*lines)
