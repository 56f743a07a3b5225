"""Argument types, the options several commands share, and reading the table a command names.

Types are small callables that raise ``argparse.ArgumentTypeError`` with one
sentence. This module imports neither the engine nor pandas, so ``--help`` is quick;
``read_input`` imports ``fitting`` when a command first reads data.
"""

from __future__ import annotations

import argparse
import difflib
import math
import sys
from pathlib import Path
from typing import Any, Callable, Sequence

MIB = 1024 * 1024
# The engine's intake limit, fitting.DEFAULT_MAX_BYTES (512 MiB), kept here so --help need not import the engine;
# tests/test_cli_package.py checks that the two agree.
DEFAULT_SIZE_LIMIT_MB = 512
MAX_SIZE_LIMIT_MB = 1024 * 1024  # 1 TiB: far above any file this reads into memory
STDIN = "-"
DEBUG_HELP = "show the full traceback of an internal error (serve: also Dash's debug mode)"


class UsageError(Exception):
    """Bad arguments or input: reported as one ``error:`` line, exit status 2."""


class RaisingParser(argparse.ArgumentParser):
    """An ArgumentParser that raises UsageError instead of printing usage and exiting."""

    def error(self, message: str):
        raise UsageError(f"{message} (see `{self.prog} --help`)")


# ----------------------------------------------------------------------------
# argument types


def _whole(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, not {text!r}") from None


def _int_at_least(n: int) -> Callable[[str], int]:
    """An argument type: a whole number of at least ``n``."""

    def parse(text: str) -> int:
        v = _whole(text)
        if v < n:
            words = "of at least 1" if n == 1 else f"of {n} or more"
            raise argparse.ArgumentTypeError(f"expected a whole number {words}, not {text!r}")
        return v

    parse.__name__ = f"whole number >= {n}"
    return parse


positive_int = _int_at_least(1)
nonneg_int = _int_at_least(0)


def finite_float(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, not {text!r}") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"expected a finite number, not {text!r}")
    return v


def reading(text: str) -> float:
    """A reading to read back: a finite number; text, NaN and infinity are refused by name."""
    try:
        return finite_float(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(f"a reading must be a finite number, not {text!r}") from None


def size_limit_mb(text: str) -> int:
    v = positive_int(text)
    if v > MAX_SIZE_LIMIT_MB:
        raise argparse.ArgumentTypeError(f"expected at most {MAX_SIZE_LIMIT_MB} (1 TiB), not {text!r}")
    return v


def port(text: str) -> int:
    v = nonneg_int(text)
    if v > 65535:
        raise argparse.ArgumentTypeError(f"a port is 0 to 65535, not {text}")
    return v


def sheet(text: str) -> str | int:
    """A sheet of a workbook, by name or by 0-based position."""
    return int(text) if text.strip().isdigit() else text


# ----------------------------------------------------------------------------
# common options


def add_command(sub, name: str, help_text: str) -> argparse.ArgumentParser:
    p = sub.add_parser(name, help=help_text, description=help_text)
    p.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help=DEBUG_HELP)
    return p


def add_columns(p: argparse.ArgumentParser, *, weights_help: str) -> None:
    p.add_argument("--x", metavar="COL", help="x column (default: the first numeric column)")
    p.add_argument("--y", metavar="COL", help="y column (default: the next numeric column)")
    p.add_argument("--weights", metavar="COL", help=weights_help)


def add_json(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="write one JSON object to stdout")


def add_intake(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--size-limit-mb",
        type=size_limit_mb,
        default=DEFAULT_SIZE_LIMIT_MB,
        metavar="MB",
        help=f"refuse input files larger than this many MiB (default: {DEFAULT_SIZE_LIMIT_MB})",
    )
    p.add_argument(
        "--sheet",
        type=sheet,
        metavar="NAME|INDEX",
        help="for a workbook: the sheet to read, by name or by position from 0 (default: the first)",
    )


# ----------------------------------------------------------------------------
# misspelt options and commands


def _command_parser(parser: argparse.ArgumentParser, argv: Sequence[str]):
    for action in parser._actions:  # argparse keeps subparsers here; there is no public accessor
        if isinstance(action, argparse._SubParsersAction):
            for token in argv:
                if token in action.choices:
                    return action.choices[token], action
            return parser, action
    return parser, None


def suggestion(parser: argparse.ArgumentParser, argv: Sequence[str]) -> str | None:
    """A "did you mean" sentence for the first unknown option or command in ``argv``, else None."""
    target, commands = _command_parser(parser, argv)
    known = [s for a in target._actions for s in a.option_strings]
    for token in argv:
        if token == STDIN or not token.startswith("-") or _is_number(token):
            continue
        name = token.split("=", 1)[0]
        if name in known:
            continue
        close = difflib.get_close_matches(name, [k for k in known if k.startswith("--")], n=1, cutoff=0.6)
        if close:
            return f"unknown option {name!r}; did you mean {close[0]}? (see `{target.prog} --help`)"
        return None
    if commands is not None and target is parser:
        words = [t for t in argv if not t.startswith("-")]
        if words and words[0] not in commands.choices:
            close = difflib.get_close_matches(words[0], list(commands.choices), n=1, cutoff=0.6)
            if close:
                return f"unknown command {words[0]!r}; did you mean {close[0]}? (see `{parser.prog} --help`)"
    return None


def _is_number(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


# ----------------------------------------------------------------------------
# reading


def existing_file(path: str, what: str = "file") -> Path:
    p = Path(path)
    if not p.exists():
        raise UsageError(f"the {what} {path!r} does not exist")
    if p.is_dir():
        raise UsageError(f"{path!r} is a folder, not a {what}")
    if not p.is_file():  # a FIFO, socket or device: reading it could block for ever
        raise UsageError(f"{path!r} is not a regular file; give a {what} on disk")
    return p


class Source:
    """Where a command's table came from: a file on disk, or standard input (``-``)."""

    def __init__(self, text: str, what: str = "file"):
        self.text = text
        self.is_stdin = text == STDIN
        self.path = None if self.is_stdin else existing_file(text, what)
        self.name = "standard input" if self.is_stdin else self.path.name
        self.data: bytes | None = None

    def sha256(self) -> str:
        from ..handover import file_sha256

        return file_sha256(self.data if self.is_stdin else self.path)


def _stdin_bytes(limit: int) -> bytes:
    stream = getattr(sys.stdin, "buffer", None)
    if stream is None:
        raise UsageError("standard input is closed; give a file name instead of -")
    data = stream.read(limit + 1)
    if len(data) > limit:
        raise UsageError(
            f"standard input holds more than the {limit // MIB:,} MiB size limit; raise it with --size-limit-mb"
        )
    return data


def read_input(source: Source, args, *, one_column: bool = False) -> Any:
    """The engine's Table of ``source``, read with the command's size limit and sheet."""
    import fitting

    reader = fitting.read_values if one_column else fitting.read_table
    limit = int(args.size_limit_mb) * MIB
    options: dict[str, Any] = {"max_bytes": limit, "name": source.name}
    if getattr(args, "sheet", None) is not None:
        options["sheet"] = args.sheet
    if source.is_stdin:
        source.data = _stdin_bytes(limit)
    try:
        return reader(source.data if source.is_stdin else source.path, **options)
    except fitting.FileTooLargeError as exc:
        raise _too_large(exc, source, args) from None
    except TypeError as exc:
        if "sheet" in options and "sheet" in str(exc):
            raise UsageError("--sheet needs an engine that reads workbooks; this one does not") from None
        raise


def _too_large(exc: Exception, source: Source, args) -> Exception:
    size = getattr(exc, "size_bytes", None)
    if size is None:
        return exc
    return UsageError(
        f"{source.name!r} is {size:,} bytes, over the {int(args.size_limit_mb):,} MiB size limit; "
        f"split the file, or raise the limit with --size-limit-mb {-(-size // MIB)}"
    )
