"""``degreescope sweep FILE``: train and test error for every degree, and the recommended degree.

Small tables are swept in memory. Without split options (``--folds``, ``--holdout``,
``--repeats``, ``--ordered``) the sweep is the verdict's, by the engine's one rule
(``fitting.verdict_sweep``, as the dashboard's verdict: degrees 0 to 20, 10 folds repeated 5
times up to 5,000 rows, whole x levels held out when x has replicates, one group at a time
with ``--group``); with them it is the sweep asked for (``fitting.sweep_degrees``). Either
way the output states the rule that made the recommendation (``verdict_rule``), and the
evidence beside it (lack of fit, added-term tests, verdict stability; ``_evidence``).
Parquet files, folders and globs of Parquet files, CSV files over ``STREAM_ABOVE_BYTES``
and ``--engine dask`` are read in chunks (``fitting.sweep_source``).
"""

from __future__ import annotations

import sys
from pathlib import Path

from .._format import fmt_number, label_with_unit, zero_scale
from . import _args, _data, _evidence, _output

HELP = "Train and test error for every degree, with a recommended degree."
DEFAULT_MAX_DEGREE = 12  # for the sweep asked for with split options, and for data read in chunks
VERDICT_MAX_DEGREE = 20  # the verdict's degrees, fitting.MAX_DEGREE (tests/test_cli_evidence.py checks they agree)
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
        default=None,
        metavar="D",
        help=f"try degrees 0 to D (default: {VERDICT_MAX_DEGREE} for the verdict's sweep, {DEFAULT_MAX_DEGREE} with "
        "split options or data read in chunks)",
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
        "--repeats",
        type=_args.positive_int,
        default=None,
        metavar="R",
        help="repeat the shuffled split R times (default: 1 with --folds or --holdout)",
    )
    p.add_argument(
        "--group", metavar="COL", help="one fold per value of this column (e.g. a batch); not with --folds or --holdout"
    )
    p.add_argument(
        "--seed", type=int, default=0, metavar="S", help="shuffle seed; the same seed gives the same split (default: 0)"
    )
    p.add_argument(
        "--stability-draws",
        type=_args.nonneg_int,
        default=_evidence.DEFAULT_STABILITY_DRAWS,
        metavar="N",
        help=f"redraw the folds N times to see how often each degree would be recommended "
        f"(default: {_evidence.DEFAULT_STABILITY_DRAWS}; 0 skips it)",
    )
    _data.add_exclusions(p)
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
    _data.check_exclusions(args)


def uses_verdict(args) -> bool:
    """True when no split option is given: the sweep is then the verdict's, by the engine's one rule."""
    return args.folds is None and args.holdout is None and args.repeats is None and not args.ordered


def _max_degree(args, verdict: bool) -> int:
    if args.max_degree is not None:
        return int(args.max_degree)
    return VERDICT_MAX_DEGREE if verdict else DEFAULT_MAX_DEGREE


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
    if wants_streaming(args):
        sweep, info = _sweep_streamed(args, range(0, _max_degree(args, False) + 1))
    else:
        sweep, info = _sweep_in_memory(args)
    d = sweep.to_dict()
    d.update(
        command="sweep",
        file=args.file,
        x=info["x"],
        y=info["y"],
        rows_used=info["rows_used"],
        rows_dropped=info["rows_dropped"],
        rows_excluded=info.get("excluded"),
        intake=info["intake"],
        verdict_rule=info.get("verdict_rule") or _asked_rule(d),
    )
    d.update(info.get("evidence") or {"evidence": None, "evidence_reason": info.get("evidence_reason")})
    if args.json:
        _output.emit_json(d)
    else:
        _print(args, d, info)
    _output.warn_all(d.get("warnings", []))
    return 0


def _asked_rule(d: dict) -> str:
    """The rule of a sweep made with the split options given: the scheme, then the recommendation rule."""
    return f"The sweep asked for ({d.get('scheme') or 'as given'}); {d['recommendation_rule']}."


def _refuse_unstreamable(args) -> None:
    unsupported = [
        o
        for o, v in (
            ("--weights", args.weights),
            ("--group", args.group),
            ("--ordered", args.ordered),
            ("--repeats", args.repeats not in (None, 1)),
            ("--sheet", args.sheet is not None),
            ("--exclude-rows", args.exclude_rows),
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
    info["evidence_reason"] = "the evidence (lack of fit, added-term tests, verdict stability) needs the rows in memory"
    return sweep, info


def _sweep_in_memory(args):
    import fitting

    source = _args.Source(args.file)
    table = _args.read_input(source, args)
    sel = table.select(args.x, args.y, weights=args.weights, group=args.group)
    _data.check_selection(sel, args.group)
    if args.group and sel.group is None:
        raise _args.UsageError(f"the group column {args.group!r} gave no labels")
    rows = _data.apply_exclusions(args, table, sel, source.name)
    verdict = uses_verdict(args)
    degrees = range(0, _max_degree(args, verdict) + 1)
    if verdict:
        sweep = fitting.verdict_sweep(
            rows.x, rows.y, weights=rows.weights, groups=rows.group, degrees=degrees, seed=args.seed
        )
    else:
        sweep = fitting.sweep_degrees(
            rows.x,
            rows.y,
            degrees=degrees,
            folds=rows.group if args.group else (args.folds if args.folds is not None else DEFAULT_FOLDS),
            holdout=args.holdout,
            ordered=args.ordered,
            repeats=args.repeats or 1,
            seed=args.seed,
            weights=rows.weights,
        )
    info = {"x": sel.x_name, "y": sel.y_name, "x_unit": sel.x_unit, "y_unit": sel.y_unit, "y_values": rows.y}
    info.update(rows_used=rows.rows_used, rows_dropped=int(sel.rows_dropped), excluded=rows.excluded)
    info.update(intake=_data.intake_dict(table, sel), source=source.name)
    info.update(lines=_data.intake_lines(table, sel) + _data.exclusion_lines(rows))
    info["verdict_rule"] = sweep.verdict_rule if verdict else None
    info["evidence"] = _sweep_evidence(args, rows, sweep, verdict)
    return sweep, info


def _sweep_evidence(args, rows, sweep, verdict: bool) -> dict:
    """Lack of fit and added-term tests per degree, the evidence sentence and the stability of the verdict.

    The redraws follow the verdict's own folds and repeats on the verdict's sweep; on a sweep asked for with
    ``--folds``/``--repeats`` they follow those (rows dealt to folds, or the groups); a single holdout has none.
    """
    import numpy as np

    groups = rows.group if args.group else None
    split: dict = {"folds": None, "repeats": "auto", "replicates": "auto"}
    if not verdict:
        units = np.unique(np.asarray(groups).astype(str)).size if groups is not None else rows.x.size
        folds = args.folds if args.folds is not None else DEFAULT_FOLDS
        split = {"folds": min(folds, units), "repeats": args.repeats or 1, "replicates": False}
    draws = 0 if args.holdout is not None else args.stability_draws
    out = _evidence.for_sweep(
        rows.x, rows.y, sweep.degrees, sweep.recommended_degree, weights=rows.weights, groups=groups, draws=draws,
        seed=args.seed, **split,
    )  # fmt: skip
    if args.holdout is not None and args.stability_draws:
        out["verdict_stability_reason"] = "redraws of the folds; this sweep used a single holdout"
    return out


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


def _p_columns(d: dict) -> list[tuple[str, list]]:
    """The p-value columns that have at least one value: added term, lack of fit."""
    cols = [("added-term p", d.get("added_term_p")), ("lack-of-fit p", d.get("lack_of_fit_p"))]
    return [(name, v) for name, v in cols if v and any(p is not None for p in v)]


def _rows(d: dict, tiny: float) -> list[list]:
    se = d["test_rmse_se"]
    p_cols = _p_columns(d)
    rows = []
    for i, deg in enumerate(d["degrees"]):
        mark = []
        if deg == d["recommended_degree"]:
            mark.append("recommended")
        if d["overfitting_from"] is not None and deg >= d["overfitting_from"]:
            mark.append("overfitting")
        cells = [d["train_rmse"][i], d["test_rmse"][i], None if se is None else se[i]]
        ps = [fmt_number(v[i], 3) for _, v in p_cols]
        rows.append([deg, *[fmt_number(v, 6, zero_below=tiny) for v in cells], *ps, ", ".join(mark)])
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
            ["degree", f"train RMSE{weighted}", f"test RMSE{weighted}", "test RMSE SE"]
            + [name for name, _ in _p_columns(d)]
            + ["note"],
            _rows(d, tiny),
            right=tuple(range(1, 4 + len(_p_columns(d)))),
        ),
        "",
        f"Recommended degree: {d['recommended_degree']}, by this rule: {d['verdict_rule']}",
    ]
    if d.get("recommendation"):
        lines.append(str(d["recommendation"]))
    lines += _evidence.sweep_text_lines(d)
    if d["overfitting_from"] is not None:
        lines.append(f"Overfitting from degree {d['overfitting_from']}.")
    for deg, why in (d.get("failed_degrees") or {}).items():
        lines.append(f"Degree {deg} failed: {why}")
    _output.say(*lines)
