"""``degreescope predict MODEL.json --from-y Y ...``: readings read back to x through a saved calibration curve.

The engine does the work (``fitting.read_back``: every root inside the calibrated range,
the calibration interval of the NIST/SEMATECH e-Handbook, section 4.5.2.1, and the
standard uncertainty of x by the delta method). This module gathers the readings (from
the command line or a column of a table), refuses bad ones with their line numbers,
and prints, writes or emits the rows. Nothing is answered silently: a reading with
several roots, none, or an interval end that is not bounded inside the range carries a
sentence, and x is null where there is no single answer in range.
"""

from __future__ import annotations

from typing import Any

from .._atomic import write_text_atomic
from .._format import fmt_number, label_with_unit
from . import _args, _output

#: the most readings one command reads back (each takes a root search and two interval searches)
MAX_READINGS = 10_000


def check_mode(args) -> bool:
    """True for read-back (``--from-y``, or ``--input`` with ``--y``); refuse options that do not fit the mode."""
    from_y = args.from_y is not None
    read_back = from_y or (args.input is not None and args.y is not None)
    if from_y and args.at is not None:
        raise _args.UsageError("give x values with --at or readings with --from-y, not both")
    if args.from_y and args.input is not None:
        raise _args.UsageError("give readings either after --from-y or in --input FILE, not both")
    if from_y and not args.from_y and args.input is None:
        raise _args.UsageError("--from-y needs readings: give them after --from-y, or in a table with --input FILE")
    if args.at is None and args.input is None and not from_y:
        raise _args.UsageError(
            "give x values with --at X ..., a table with --input FILE, or readings to read back with --from-y Y ... "
            "(see `degreescope predict --help`)"
        )
    if read_back and args.x is not None:
        raise _args.UsageError("--x picks the column of x values to predict at; name the column of readings with --y")
    if not read_back and args.y is not None:
        raise _args.UsageError("--y picks the column of readings to read back, with --input FILE")
    if not read_back and args.readings != 1:
        raise _args.UsageError("--readings applies to readings read back with --from-y")
    if from_y and len(args.from_y) > MAX_READINGS:
        raise _args.UsageError(f"{len(args.from_y):,} readings are more than the {MAX_READINGS:,} one command reads")
    return read_back


def _reading_column(args, model, table) -> str:
    numeric = list(table.report.numeric_columns)
    col = args.y
    if col is None:
        if model.y_name in numeric:
            col = model.y_name
        elif len(numeric) == 1:
            col = numeric[0]
        elif not numeric:
            raise _args.UsageError(f"{args.input!r} has no numeric column of readings")
        else:
            names = ", ".join(repr(c) for c in numeric)
            raise _args.UsageError(f"{args.input!r} has several numeric columns ({names}); name the readings with --y")
    if col not in numeric:
        where = "has no column" if col not in table.report.columns else "holds text, not numbers, in column"
        raise _args.UsageError(
            f"{args.input!r} {where} {col!r}; numeric columns: {', '.join(repr(c) for c in numeric) or 'none'}"
        )
    return col


def readings_from_table(args, model, source):
    """The readings of ``--input`` (every cell a finite number, else refused with its lines), their lines, column."""
    import numpy as np

    table = _args.read_input(source, args, one_column=True)  # a plain one-column list of readings is fine
    col = _reading_column(args, model, table)
    ys = table.frame[col].to_numpy(dtype=np.float64)
    lines = np.asarray(table.line_numbers, dtype=np.int64)
    bad = ~np.isfinite(ys)
    if bad.any():
        shown = _output.lines_phrase(lines[bad][:10].tolist(), int(bad.sum()))
        raise _args.UsageError(
            f"the column {col!r} of {args.input!r} holds {int(bad.sum()):,} readings that are empty, text or not "
            f"finite ({shown}); fix or remove them, none is read back"
        )
    if ys.size == 0:
        raise _args.UsageError(f"the column {col!r} of {args.input!r} holds no readings")
    if ys.size > MAX_READINGS:
        raise _args.UsageError(
            f"{args.input!r} holds {ys.size:,} readings, more than the {MAX_READINGS:,} one command reads back; "
            "split the file"
        )
    return ys, lines, col


def row_dicts(result, lines) -> list[dict[str, Any]]:
    """One dict per reading: its file line (or null), then the engine's row."""
    rows = []
    for i, r in enumerate(result.rows):
        d = {"line": None if lines is None else int(lines[i])}
        d.update(r.to_dict())
        rows.append(d)
    return rows


def all_warnings(model, result, rows) -> list[str]:
    """The model's and the read-back's warnings, then each reading's, prefixed with the reading."""
    out = list(model.warnings) + list(result.warnings)
    for i, r in enumerate(rows, start=1):
        where = f"line {r['line']}" if r["line"] is not None else f"reading {i}"
        out += [f"{where} (y = {fmt_number(r['y'], 8)}): {w}" for w in r["warnings"]]
    return out


def run(args, model, inputs: list) -> int:
    """Read the readings back, write the CSV when asked, and print or emit the rows."""
    import numpy as np

    import fitting

    from .. import handover

    lines, label = None, model.y_name or "y"
    if args.from_y:
        ys = np.asarray(args.from_y, dtype=np.float64)
    else:
        source = _args.Source(args.input, "input file")
        ys, lines, label = readings_from_table(args, model, source)
        inputs = inputs + ([] if source.is_stdin else [source.path])
    result = fitting.read_back(model, ys, readings=args.readings, level=args.level)
    rows = row_dicts(result, lines)
    warnings_all = all_warnings(model, result, rows)
    written = None
    if args.output:
        text = handover.read_back_csv(
            rows, x_name=model.x_name or "x", y_name=label, level=args.level, with_lines=lines is not None
        )
        written = _output.write_output(args.output, lambda p: write_text_atomic(p, text), inputs=inputs)
    if args.json:
        _emit(args, model, result, rows, warnings_all, written)
    else:
        _print(args, model, result, rows, label, written)
    _output.warn_all(list(model.warnings) + list(result.warnings) + _row_summary(rows))
    return 0


def _row_summary(rows) -> list[str]:
    """One sentence per kind of problem, for stderr (the rows themselves carry the details)."""
    none = sum(1 for r in rows if not r["roots"])
    several = sum(1 for r in rows if len(r["roots"]) > 1)
    open_end = sum(1 for r in rows if r["x"] is not None and (r["x_lower"] is None or r["x_upper"] is None))
    out = []
    if none:
        out.append(f"{none} of {len(rows)} readings lie outside the responses the calibrated range covers; no x given.")
    if several:
        out.append(f"{several} of {len(rows)} readings match more than one x in the calibrated range; no x given.")
    if open_end:
        out.append(f"{open_end} of {len(rows)} calibration intervals have an end not bounded inside the range.")
    return out


def _emit(args, model, result, rows, warnings_all, written) -> None:
    d = result.to_dict()
    _output.emit_json(
        {
            "command": "predict",
            "mode": "read_back",
            "model": args.model,
            "level": args.level,
            "readings": args.readings,
            "x_name": model.x_name,
            "y_name": model.y_name,
            "domain": list(model.domain),
            "weighting": d["weighting"],
            "monotonic": d["monotonic"],
            "turning_points": d["turning_points"],
            "rows": rows,
            "outside_range_count": sum(1 for r in rows if r["outside_range"]),
            "no_single_root_count": sum(1 for r in rows if r["x"] is None),
            "warnings": warnings_all,
            "caution": d["caution"],
            "output_file": str(written) if written else None,
        }
    )


def _note(r: dict) -> str:
    if not r["roots"]:
        return "outside"
    if len(r["roots"]) > 1:
        return f"{len(r['roots'])} roots"
    if r["x_lower"] is None or r["x_upper"] is None:
        return "open end" if r["u_x"] is not None else "no interval"
    return ""


def _print(args, model, result, rows, label, written) -> None:
    pct = f"{args.level * 100:g} %"
    x_label = label_with_unit(model.x_name or "x", model.x_unit)
    y_label = label_with_unit(label, model.y_unit if label == model.y_name else None)
    with_lines = rows and rows[0]["line"] is not None
    head = (["line"] if with_lines else ["#"]) + [y_label, x_label, "lower", "upper", "u(x)", "note"]
    body = [
        [r["line"] if with_lines else i] + [r["y"], r["x"], r["x_lower"], r["x_upper"], r["u_x"], _note(r)]
        for i, r in enumerate(rows, start=1)
    ]
    mean_of = f", each the mean of {args.readings} readings" if args.readings > 1 else ""
    lines = [
        f"Read-back through {args.model} (degree {model.degree}, {pct} calibration intervals{mean_of})",
        f"Calibrated range of {x_label}: {fmt_number(model.domain[0], 6)} to {fmt_number(model.domain[1], 6)}",
        "",
        _output.table(head, body, digits=8, right=(2, 3, 4, 5)),
    ]
    notes = all_warnings(model, result, rows)
    if notes:
        lines += ["", "Notes:", *[f"  {w}" for w in notes]]
    lines += ["", result.to_dict()["caution"]]
    if written:
        lines += ["", f"Read-back written to {written}"]
    _output.say(*lines)
