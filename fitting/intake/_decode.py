"""Stage 1: bytes to text (rules 1-4): size, binary refusal, encoding, line ends."""

from __future__ import annotations

import os
import stat

from .._errors import FileTooLargeError, IntakeError
from ._patterns import _CONTROL, _SAMPLE_CHARS
from ._wording import echo, size_pair

SIGNATURES = (
    (b"PK\x03\x04", "a ZIP archive, such as an .xlsx or .ods spreadsheet"),
    (b"PK\x05\x06", "an empty ZIP archive"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "a legacy Office file, such as an .xls spreadsheet"),
    (b"\x89PNG\r\n\x1a\n", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"GIF87a", "a GIF image"),
    (b"GIF89a", "a GIF image"),
    (b"%PDF-", "a PDF document"),
    (b"\x1f\x8b", "a gzip archive"),
    (b"7z\xbc\xaf\x27\x1c", "a 7-Zip archive"),
    (b"PAR1", "a Parquet file"),
    (b"SQLite format 3\x00", "an SQLite database"),
)
"""Leading bytes of files that are not text, with what they are."""

_NUL_WHAT = "it holds only NUL bytes (zeros), as a damaged or unfinished download does"


def signature_of(data: bytes) -> str | None:
    """What the leading bytes say the file is ("a PNG image"), or None for text."""
    for sig, what in SIGNATURES:
        if data.startswith(sig):
            return what
    return None


def binary_error(display: str, what: str) -> IntakeError:
    return IntakeError(
        f"{echo(display)} looks like a spreadsheet or binary file ({what}), not CSV text; "
        f"export it as CSV from the program that made it and load that file."
    )


def refuse_binary_head(head: bytes, display: str) -> None:
    """The binary checks that need only the first bytes: known signatures and NUL bytes."""
    what = signature_of(head)
    if what is not None:
        raise binary_error(display, what)
    if head and not head.strip(b"\x00"):
        raise binary_error(display, _NUL_WHAT)
    if b"\x00" in head:
        raise binary_error(display, "it contains NUL bytes")


def load(source, max_bytes: int, name: str | None) -> tuple[bytes, str]:
    """Rule 1: (bytes, display name) of an upload or a regular file, refusing what is too large."""
    if isinstance(source, (bytes, bytearray, memoryview)):
        data = bytes(source)
        display = name or "upload"
        if len(data) > max_bytes:
            raise too_large(display, len(data), max_bytes)
        return data, display
    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        if isinstance(path, bytes):
            path = os.fsdecode(path)
        display = name or os.path.basename(path) or path
        try:
            mode = os.stat(path).st_mode
            if stat.S_ISDIR(mode):
                raise IsADirectoryError(path)
            if not stat.S_ISREG(mode):  # before open(): opening a FIFO blocks until a writer comes
                raise IntakeError(f"{echo(display)} is not a regular file; choose a CSV file.")
            with open(path, "rb") as fh:
                st = os.fstat(fh.fileno())
                if not stat.S_ISREG(st.st_mode):
                    raise IntakeError(f"{echo(display)} is not a regular file; choose a CSV file.")
                if st.st_size > max_bytes:
                    raise too_large(display, st.st_size, max_bytes)
                data = fh.read(max_bytes + 1)
        except FileNotFoundError:
            raise IntakeError(f"There is no file at {echo(path, 200)}; check the path and try again.") from None
        except IsADirectoryError:
            raise IntakeError(f"{echo(path, 200)} is a folder, not a file; choose a CSV file inside it.") from None
        except PermissionError:
            raise IntakeError(
                f"{echo(path, 200)} cannot be opened for reading (permission denied); copy it somewhere "
                f"readable or ask for access."
            ) from None
        except OSError as exc:
            raise IntakeError(f"{echo(path, 200)} cannot be read ({exc.strerror or exc}); check the file.") from None
        if len(data) > max_bytes:
            raise too_large(display, len(data), max_bytes)
        return data, display
    raise TypeError(f"read_table takes bytes or a path (str or os.PathLike), not {type(source).__name__}")


def too_large(display: str, size: int, limit: int) -> FileTooLargeError:
    """The size refusal; exact byte counts when the rounded sizes would read the same."""
    a, b = size_pair(size, limit)
    if a.endswith(" bytes") and b.endswith(" bytes"):
        text = f"{echo(display)} is {a}, over the size limit of {b}"
    else:
        text = f"{echo(display)} is {a} ({size:,} bytes), over the {b} size limit"
    err = FileTooLargeError(f"{text}; split the file, or raise the limit with max_bytes to at least {size:,} bytes.")
    err.size_bytes = size
    err.limit_bytes = limit
    return err


def empty_error(display: str) -> IntakeError:
    return IntakeError(f"{echo(display)} is empty; choose a file with a header line and rows of numbers.")


def decode(data: bytes, display: str) -> tuple[str, str]:
    """(text, encoding label) by rule 3; binary content raises IntakeError (rule 2)."""
    what = signature_of(data)
    if what is not None:
        raise binary_error(display, what)
    if data and not data.strip(b"\x00"):
        raise binary_error(display, _NUL_WHAT)
    label, codec, body = _encoding_of(data, display)
    if label == "utf-8":
        try:
            return clean_text(body.decode("utf-8"), display), label
        except UnicodeDecodeError:
            label = codec = "cp1252"
    try:
        text = body.decode(codec)
    except UnicodeDecodeError:
        if label == "cp1252":
            raise binary_error(display, "its bytes are not text in UTF-8, UTF-16 or Windows-1252") from None
        raise binary_error(display, f"its bytes are not valid {label} text") from None
    return clean_text(text, display), label


def _encoding_of(data: bytes, display: str) -> tuple[str, str, bytes]:
    """(label, codec, body without the byte-order mark) from the mark or the NUL pattern."""
    for bom, label, codec in (
        (b"\xef\xbb\xbf", "utf-8-sig", "utf-8"),
        (b"\xff\xfe\x00\x00", "utf-32", "utf-32-le"),
        (b"\x00\x00\xfe\xff", "utf-32", "utf-32-be"),
        (b"\xff\xfe", "utf-16", "utf-16-le"),
        (b"\xfe\xff", "utf-16", "utf-16-be"),
    ):
        if data.startswith(bom):
            return label, codec, data[len(bom) :]
    if b"\x00" in data:
        head = data[:4096]
        half = len(head) // 2
        even, odd = head[0::2].count(0), head[1::2].count(0)
        if half and odd > 0.3 * half and even == 0:
            return "utf-16-le", "utf-16-le", data
        if half and even > 0.3 * half and odd == 0:
            return "utf-16-be", "utf-16-be", data
        raise binary_error(display, "it contains NUL bytes")
    return "utf-8", "utf-8", data


def clean_text(text: str, display: str) -> str:
    if "\x00" in text:
        raise binary_error(display, "it contains NUL characters")
    head = text[:_SAMPLE_CHARS]
    if head and len(_CONTROL.findall(head)) > 0.01 * len(head):
        raise binary_error(display, "it is full of control characters")
    if "\ufeff" in text:
        text = text.replace("\ufeff", "")
    return text.rstrip("\x1a")
