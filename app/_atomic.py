"""Whole-or-nothing file writes, and CSV cells that spreadsheets will not run.

``write_text_atomic`` and ``write_bytes_atomic`` write to a temporary file in
the destination's own folder, flush it to disk, then ``os.replace`` it over the
destination. ``os.replace`` is atomic on POSIX and Windows when both names are
on one file system, which a sibling temporary file guarantees: a reader sees
the old file or the new one, never half of either, and a crash or a full disk
leaves the old file as it was (the temporary file is removed).

``neutralise_cell`` follows the OWASP guidance on CSV injection: a text cell
that begins with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return is
prefixed with a single quote, so a spreadsheet shows it as text instead of
evaluating it as a formula. Numbers are written by the caller as numbers and
never pass through it, so a negative value stays a negative value.
"""

from __future__ import annotations

import contextlib
import csv
import io
import os
import tempfile
from pathlib import Path
from typing import Iterable, Sequence

__all__ = ["neutralise_cell", "write_bytes_atomic", "write_csv_atomic", "write_text_atomic"]

_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(value: object) -> object:
    """Return ``value`` with a leading ``'`` if it is text a spreadsheet would treat as a formula.

    Non-text values (int, float, None) are returned unchanged.
    """
    if isinstance(value, str) and value.startswith(_FORMULA_STARTS):
        return "'" + value
    return value


def write_bytes_atomic(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically; return the resolved destination path."""
    dest = Path(path)
    folder = dest.parent if str(dest.parent) else Path(".")
    if not folder.is_dir():
        raise FileNotFoundError(f"The folder {str(folder)!r} does not exist.")
    fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".part", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        # mkstemp creates the file 0600; give it the mode a plain open() would have
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, dest)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    return dest


def write_text_atomic(path: str | os.PathLike[str], text: str, *, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` atomically (UTF-8, ``\\n`` line ends)."""
    return write_bytes_atomic(path, text.encode(encoding))


def write_csv_atomic(path: str | os.PathLike[str], header: Sequence[str], rows: Iterable[Sequence[object]]) -> Path:
    """Write a CSV file atomically; every text cell (header included) is neutralised."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([neutralise_cell(h) for h in header])
    for row in rows:
        writer.writerow([neutralise_cell(v) for v in row])
    return write_text_atomic(path, buf.getvalue())
