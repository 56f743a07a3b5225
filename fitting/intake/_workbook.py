"""Workbooks (.xlsx, .xlsm, .xls, .ods) through python-calamine, into the same rules as text.

Each sheet row becomes one tab-separated line, so line numbers are row numbers and the
text rules decide header, units, markers and dropped rows (see "Workbooks" in
``fitting.intake``'s docstring).
"""

from __future__ import annotations

import datetime as _dt
import io
import os
import re
import zipfile
from dataclasses import replace

from .._errors import IntakeError
from ._decode import binary_error, signature_of
from ._dialect import OneColumnError, decide_decimal
from ._results import Table
from ._wording import echo, echo_list, plural

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods")
"""File-name endings read as workbooks."""

_ZIP = b"PK\x03\x04"
_OLE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ENCRYPTED_MARK = "EncryptionInfo".encode("utf-16-le")
_NS_MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
_NS_REL = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}"


def workbook_kind(data: bytes, display: str) -> str | None:
    """ "xlsx", "xlsm", "xls" or "ods" when the input is a workbook, None for text or other files.

    A name ending in a workbook suffix whose bytes are neither a ZIP nor a legacy Office
    container is refused when the bytes are another known binary format (a renamed
    image) and read as text otherwise (text saved under a workbook name).
    """
    suffix = os.path.splitext(display.lower())[1]
    container = data.startswith(_ZIP) or data.startswith(_OLE)
    if suffix in WORKBOOK_SUFFIXES:
        if container:
            return suffix[1:]
        what = signature_of(data)
        if what is not None:
            raise IntakeError(
                f"{echo(display)} is named as a {suffix} workbook, but its bytes are {what}, not a "
                f"workbook; check that this is the file you meant, or export the sheet as CSV."
            )
        return None
    if data.startswith(_OLE):
        return "xls"
    if data.startswith(_ZIP):
        try:
            names = set(zipfile.ZipFile(io.BytesIO(data)).namelist())
        except zipfile.BadZipFile:
            return None
        if "xl/workbook.xml" in names:
            return "xlsx"
        if "content.xml" in names and "mimetype" in names:
            return "ods"
    return None


def _encrypted_error(display: str) -> IntakeError:
    return IntakeError(
        f"{echo(display)} is a password-protected (encrypted) workbook, which this reader cannot open; "
        f"open it in its spreadsheet program, remove the password or export the sheet as CSV, and load that."
    )


def _open(data: bytes, display: str, kind: str):
    from python_calamine import CalamineWorkbook, PasswordError

    if data.startswith(_OLE) and _ENCRYPTED_MARK in data:
        raise _encrypted_error(display)
    try:
        return CalamineWorkbook.from_filelike(io.BytesIO(data))
    except PasswordError:
        raise _encrypted_error(display) from None
    except Exception as exc:  # calamine's errors have no common base below Exception
        first = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        if "password" in first.lower() or "encrypt" in first.lower():
            raise _encrypted_error(display) from None
        if os.path.splitext(display.lower())[1] not in WORKBOOK_SUFFIXES:
            raise binary_error(display, signature_of(data) or "not a workbook") from None
        raise IntakeError(
            f"{echo(display)} could not be opened as an {kind} workbook ({echo(first, 120)}); "
            f"check that it is a spreadsheet file, or export the sheet as CSV."
        ) from None


def read_workbook(data: bytes, display: str, kind: str, sheet, parse_text) -> Table:
    """The Table of one sheet: ``sheet`` (name or 0-based index), else the first that reads."""
    wb = _open(data, display, kind)
    names = list(wb.sheet_names)
    if not names:
        raise IntakeError(f"{echo(display)} holds no sheets; choose another file.")
    if sheet is not None:
        chosen = _sheet_name(names, sheet, display)
        return _read_sheet(wb, data, display, kind, chosen, names, parse_text)
    first_error = None
    for candidate in names:
        try:
            return _read_sheet(wb, data, display, kind, candidate, names, parse_text)
        except IntakeError as exc:
            first_error = first_error or exc
    if len(names) == 1:
        raise first_error
    raise IntakeError(
        f"No sheet of {echo(display)} holds a table with two numeric columns (sheets: {echo_list(names)}); "
        f"on the first sheet: {first_error}"
    )


def _sheet_name(names: list[str], sheet, display: str) -> str:
    if isinstance(sheet, int) and not isinstance(sheet, bool):
        if 0 <= sheet < len(names):
            return names[sheet]
        raise IntakeError(
            f"{echo(display)} has {plural(len(names), 'sheet')}, numbered 0 to {len(names) - 1}; "
            f"there is no sheet {sheet}."
        )
    if isinstance(sheet, str):
        if sheet in names:
            return sheet
        folded = [n for n in names if n.casefold() == sheet.casefold()]
        if len(folded) == 1:
            return folded[0]
    raise IntakeError(f"{echo(display)} has no sheet named {echo(sheet)}; its sheets are {echo_list(names, 50)}.")


def _read_sheet(wb, data: bytes, display: str, kind: str, name: str, names: list[str], parse_text) -> Table:
    rows = wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
    text, decimal = cells_to_text(rows)
    where = f"{display} [{name}]" if len(names) > 1 else display
    try:
        table = parse_text(text, where, f"{kind} workbook", fast=True, delimiters=("\t",), decimal=decimal)
    except OneColumnError:
        raise OneColumnError(
            f"Sheet {echo(name)} of {echo(display)} has only one column of values; a curve needs two "
            f"numeric columns, so put x and y in separate columns."
        ) from None
    notes = list(table.report.notes)
    if kind in ("xlsx", "xlsm"):
        missing = formulas_without_value(data, name)
        if missing:
            notes.append(
                f"{plural(missing, 'formula cell')} in sheet {echo(name)} {'has' if missing == 1 else 'have'} "
                f"no saved value (the file was written by a program that does not calculate formulas), so "
                f"{'it reads' if missing == 1 else 'they read'} as empty; open the file in a spreadsheet "
                f"program, let it calculate, save it and load it again."
            )
    report = replace(table.report, source_name=display, delimiter="", notes=notes, sheet=name, sheet_names=names)
    return replace(table, report=report)


def _cell_text(v, mark: str) -> str:
    """One cell as the text a careful CSV export would hold (numbers exact, see the module docstring)."""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, float):
        s = repr(v)
        return s.replace(".", ",") if mark == "," else s
    if isinstance(v, int):
        return str(v)
    if isinstance(v, _dt.datetime):
        return v.isoformat(sep=" ")
    if isinstance(v, (_dt.date, _dt.time)):
        return v.isoformat()
    s = re.sub(r"[\t\r\n]+", " ", str(v))
    if '"' in s:
        return '"' + s.replace('"', '""') + '"'
    return s


def cells_to_text(rows: list[list]) -> tuple[str, str]:
    """(tab-separated text, decimal mark): one line per sheet row from row 1.

    The decimal mark is voted by the text cells alone (rule 8); number cells are then
    written with it. Columns empty in every row at the right edge are left off.
    """
    width = 0
    for row in rows:
        for j in range(len(row) - 1, -1, -1):
            if row[j] != "" and row[j] is not None:
                width = max(width, j + 1)
                break
    texts = [v for row in rows for v in row if isinstance(v, str) and v]
    mark = decide_decimal("\t", texts[:100_000])
    lines = ["\t".join(_cell_text("" if v is None else v, mark) for v in row[:width]) for row in rows]
    return "\n".join(lines), mark


def _sheet_paths(z: zipfile.ZipFile) -> dict[str, str]:
    """Sheet name -> worksheet XML path, from the workbook part and its relationships."""
    from xml.etree import ElementTree  # here, not at import: only workbooks need it

    book = ElementTree.fromstring(z.read("xl/workbook.xml"))
    rels = ElementTree.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    target = {r.get("Id"): r.get("Target", "") for r in rels}
    out = {}
    for s in book.iter(f"{_NS_MAIN}sheet"):
        t = target.get(s.get(f"{_NS_REL}id"), "")
        out[s.get("name")] = t.lstrip("/") if t.startswith("/") else "xl/" + t
    return out


def formulas_without_value(data: bytes, sheet: str) -> int:
    """How many formula cells of an .xlsx/.xlsm sheet were saved without a value (0 when unknown)."""
    from xml.etree import ElementTree  # here, not at import: only workbooks need it

    try:
        with zipfile.ZipFile(io.BytesIO(data)) as z:
            path = _sheet_paths(z).get(sheet)
            if path is None:
                return 0
            n = 0
            with z.open(path) as fh:
                for _, el in ElementTree.iterparse(fh):
                    if el.tag == f"{_NS_MAIN}c":
                        f, v = el.find(f"{_NS_MAIN}f"), el.find(f"{_NS_MAIN}v")
                        if f is not None and (v is None or not (v.text or "")):
                            n += 1
                        el.clear()
            return n
    except (zipfile.BadZipFile, KeyError, ElementTree.ParseError):
        return 0
