"""The ``degreescope`` command line.

    degreescope [--debug] serve   [FILE] [--host H] [--port P] [--threads N] [--no-token] ...
    degreescope [--debug] fit     FILE --degree N [--x COL] [--y COL] [--weights COL | --weighting RULE] ...
    degreescope [--debug] sweep   FILE [--max-degree D] [--folds K | --holdout F | --group COL] ...
    degreescope [--debug] predict MODEL.json (--at X [X ...] | --input FILE) ...
    degreescope [--debug] predict MODEL.json (--from-y Y [Y ...] | --input FILE (--y COL | --from-y)) ...
    degreescope --version

FILE may be ``-`` for standard input; ``--sheet NAME|INDEX`` picks a workbook's sheet.

Exit status (the ``EXIT_*`` names below): 0 on success; 2 for bad input (a file, a
column, an option, data that cannot carry the fit), with one ``error:`` line on
stderr; 1 for an internal error (``--debug`` prints its traceback); 130 when
interrupted.

With ``--json`` exactly one JSON object goes to stdout; NaN and infinity are
written as null. Warnings go to stderr as ``warning:`` lines, and into the
JSON object's ``warnings``.

One module per command (``fit``, ``sweep``, ``predict``, ``serve``), each adding its own
subparser; ``_args`` holds the argument types and shared options, ``_output`` the
tables, JSON and warnings, ``_data`` the column checks and rows left out on purpose,
``_readback`` reading readings back through a model, ``_standards`` the named weighting,
back-calculated standards and weighting comparison, ``_evidence`` the tests beside a
degree (lack of fit, added term, Mandel, influence, verdict stability).
The engine is imported when a command runs, not for
``--help`` or ``--version``; only ``serve`` imports dash and plotly. Files the command
line writes are written whole or not at all (``app._atomic``) through ``app.handover``;
input files are only read.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
import traceback
import warnings as _warnings
from typing import Sequence

from . import _args, fit, predict, serve, sweep
from ._args import UsageError

__all__ = ["EXIT_INTERNAL", "EXIT_INTERRUPTED", "EXIT_OK", "EXIT_USAGE", "UsageError", "build_parser", "main"]

EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_USAGE = 2
EXIT_INTERRUPTED = 130

COMMANDS = (serve, fit, sweep, predict)


class _VersionAction(argparse.Action):
    """``--version``: the installed version, looked up only when asked for."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from ..handover import degreescope_version

        sys.stdout.write(f"degreescope {degreescope_version()}\n")
        parser.exit(EXIT_OK)


def build_parser() -> argparse.ArgumentParser:
    top = _args.RaisingParser(
        prog="degreescope",
        description="Fit polynomials to paired measurements, choose the degree by cross-validation, "
        "and hand over a model.",
        epilog=f"Exit status: {EXIT_OK} success, {EXIT_USAGE} bad input or arguments, {EXIT_INTERNAL} internal error, "
        f"{EXIT_INTERRUPTED} interrupted.",
    )
    top.add_argument("--debug", action="store_true", help=_args.DEBUG_HELP)
    top.add_argument("--version", action=_VersionAction, help="print the version and exit")
    sub = top.add_subparsers(dest="command", metavar="COMMAND", parser_class=_args.RaisingParser)
    sub.required = True
    for command in COMMANDS:
        command.add_parser(sub)
    return top


def _one_line(text) -> str:
    return " ".join(str(text).split()) or "(no message)"


def _error(message: str, code: int = EXIT_USAGE) -> int:
    sys.stderr.write(f"error: {message}\n")
    return code


def _is_engine_error(exc: BaseException) -> bool:
    engine = sys.modules.get("fitting")  # not imported yet: then it cannot have raised
    return engine is not None and isinstance(exc, engine.DegreescopeError)


def _parse(parser: argparse.ArgumentParser, argv: list[str]) -> argparse.Namespace:
    try:
        return parser.parse_args(argv)
    except UsageError:
        hint = _args.suggestion(parser, argv)
        if hint is None:
            raise
        raise UsageError(hint) from None


def _quiet_stdout() -> None:
    with contextlib.suppress(OSError):
        sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - the reader went away; stay quiet until exit


def _run(argv: list[str], state: dict) -> int:
    """Parse and run one command; map every exception to its exit status and one ``error:`` line."""
    try:
        args = _parse(build_parser(), argv)
        state["debug"] = bool(getattr(args, "debug", state["debug"]))
        return int(args.func(args) or EXIT_OK)
    except UsageError as exc:
        return _error(_one_line(exc))
    except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        name = f" {exc.filename!r}" if getattr(exc, "filename", None) else ""
        return _error(f"cannot read{name}: {_one_line(exc.strerror or exc)}")
    except KeyboardInterrupt:
        return _error("interrupted", EXIT_INTERRUPTED)
    except BrokenPipeError:
        _quiet_stdout()
        return EXIT_INTERNAL
    except SystemExit as exc:  # --help and --version print and exit 0
        return int(exc.code or EXIT_OK) if isinstance(exc.code, int) else EXIT_OK
    except Exception as exc:  # noqa: BLE001 - the boundary for unexpected errors
        if _is_engine_error(exc):
            return _error(_one_line(exc))
        if state["debug"]:
            traceback.print_exc(file=sys.stderr)
        return _error(
            f"internal error ({type(exc).__name__}: {_one_line(exc)[:300]}); "
            "run again with --debug to see the traceback, and please report it",
            EXIT_INTERNAL,
        )


def main(argv: Sequence[str] | None = None) -> int:
    """Run ``degreescope`` with ``argv`` (default: ``sys.argv[1:]``); return the exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    state = {"debug": "--debug" in argv}
    with _warnings.catch_warnings(record=True) as caught:
        _warnings.simplefilter("always")
        code = _run(argv, state)
    if state["debug"]:  # Python warnings the engine raised beside its own ``warnings`` lists
        seen: set[str] = set()
        for w in caught:
            msg = _one_line(w.message)
            if msg not in seen and not issubclass(w.category, (DeprecationWarning, PendingDeprecationWarning)):
                seen.add(msg)
                _output_warn(msg)
    return code


def _output_warn(message: str) -> None:
    from ._output import warn

    warn(message)
