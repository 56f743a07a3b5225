"""Workbooks (.xlsx, .ods) read by the same rules as CSV text, and pasted tables.

Every workbook here is made in the test (openpyxl for .xlsx; pandas with odfpy,
engine="odf", for .ods) from invented bench-calibration numbers, together with the CSV a
spreadsheet program would export from the same cells (semicolon-delimited, decimal
comma). The outside reference for the cells is the writer library; the check is that
the workbook reads to the same Table values, row numbers and IntakeReport as that CSV.
.xls: no library in the environment writes one, so only the refusal paths of the legacy
container are tested (a damaged and a password-protected one).
"""

from __future__ import annotations

import datetime as dt
import io
import re
import zipfile

import numpy as np
import pandas as pd
import pytest

from fitting import ColumnError, IntakeError, read_table

TITLE = ["Bench calibration, invented data for tests"]
OPERATOR = ["Operator: A. Tester", None, "Instrument: bench photometer (invented)"]
HEADER = ["conc (mg/L)", "signal (mV)", "doubled", "reading (AU)", "replicate", None, "taken"]
# conc, signal, reading (text with a decimal comma), replicate, drift, date; None = empty
DATA = [
    (0.0, 0.0131, "3,41", 1.0, 0.5, dt.date(2024, 1, 5)),
    (0.5, 0.0642, "3,52", 2.0, 0.25, dt.date(2024, 1, 5)),
    (1.0, 0.1187, "3,6", 3.0, 0.125, dt.date(2024, 1, 6)),
    None,  # an empty row
    (2.0, "n/a", "3,77", 1.0, 0.0625, dt.date(2024, 1, 6)),
    (4.0, 0.4093, "4,05", 2.0, 0.375, dt.date(2024, 1, 7)),
    (8.0, 0.8199, "n.v.", 3.0, 1e-7, dt.date(2024, 1, 7)),
    (16.0, 1.6402, "5,12", 1.0, 2.0**-20, dt.date(2024, 1, 8)),
]
SUMMARY = ["mean", 0.4442]
FIRST_DATA_ROW = 5


def sheet_rows(*, doubled_cached: bool) -> list[list]:
    """The data sheet's rows from row 1; ``doubled`` holds 2 * signal when its cached value is kept."""
    rows = [TITLE, OPERATOR, [], HEADER]
    for rec in DATA:
        if rec is None:
            rows.append([])
            continue
        conc, signal, reading, rep, drift, day = rec
        doubled = 2 * signal if doubled_cached and isinstance(signal, float) else None
        rows.append([conc, signal, doubled, reading, rep, drift, day])
    rows.append(SUMMARY)
    return rows


def csv_of(rows: list[list]) -> bytes:
    """The export a spreadsheet program with a decimal comma would write: ';' and ','."""

    def cell(v) -> str:
        if v is None:
            return ""
        if isinstance(v, float):
            return repr(v).replace(".", ",")
        if isinstance(v, dt.date):
            return v.isoformat()
        return str(v)

    return ("\n".join(";".join(cell(v) for v in row) for row in rows) + "\n").encode("utf-8")


def make_xlsx(rows: list[list]) -> bytes:
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    about = wb.active
    about.title = "About"
    about["A1"] = "Invented calibration workbook; the table is on the next sheet."
    ws = wb.create_sheet("Run 1")
    for r, row in enumerate(rows, start=1):
        for c, v in enumerate(row, start=1):
            if v is not None:
                ws.cell(row=r, column=c, value=v)
    for r in range(FIRST_DATA_ROW, FIRST_DATA_ROW + len(DATA)):
        if ws.cell(row=r, column=1).value is not None:
            ws.cell(row=r, column=3, value=f"=B{r}*2")  # saved without a value by openpyxl
    ws.merge_cells("E4:F4")
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def make_ods(rows: list[list]) -> bytes:
    pytest.importorskip("odf")
    from odf.namespaces import TABLENS
    from odf.table import TableCell, TableRow

    width = max(len(r) for r in rows)
    frame = pd.DataFrame([list(r) + [None] * (width - len(r)) for r in rows], dtype=object)
    about = pd.DataFrame([["Invented calibration workbook; the table is on the next sheet."]])
    buf = io.BytesIO()
    with pd.ExcelWriter(buf, engine="odf") as writer:
        about.to_excel(writer, sheet_name="About", header=False, index=False)
        frame.to_excel(writer, sheet_name="Run 1", header=False, index=False)
        table = writer.sheets["Run 1"]
        trs = table.getElementsByType(TableRow)
        header_cells = trs[3].getElementsByType(TableCell)
        header_cells[4].setAttrNS(TABLENS, "number-columns-spanned", "2")  # E4:F4 merged
        for r in range(FIRST_DATA_ROW, FIRST_DATA_ROW + len(DATA)):
            cells = trs[r - 1].getElementsByType(TableCell)
            if rows[r - 1] and rows[r - 1][2] is not None:  # a formula with its saved value
                cells[2].setAttrNS(TABLENS, "formula", f"of:=[.B{r}]*2")
    return buf.getvalue()


REPORT_FIELDS = (
    "decimal",
    "thousands",
    "header_line",
    "rows_read",
    "columns",
    "numeric_columns",
    "units",
    "dropped",
)


def assert_same_table(book, text, *, extra_notes=()):
    pd.testing.assert_frame_equal(book.frame, text.frame, check_exact=True)
    assert book.line_numbers.tolist() == text.line_numbers.tolist()
    for name in REPORT_FIELDS:
        assert getattr(book.report, name) == getattr(text.report, name), name
    for k, v in text.report.dropped.items():
        assert book.report.dropped[k].listed_lines == v.listed_lines
    assert [n for n in book.report.notes if n not in extra_notes] == text.report.notes
    sb, st = book.select(), text.select()
    assert (sb.x_name, sb.y_name, sb.rows_used) == (st.x_name, st.y_name, st.rows_used)
    assert sb.x.tolist() == st.x.tolist() and sb.y.tolist() == st.y.tolist()
    assert {k: v.listed_lines for k, v in sb.dropped.items()} == {k: v.listed_lines for k, v in st.dropped.items()}


def test_xlsx_reads_like_its_csv_export():
    rows = sheet_rows(doubled_cached=False)
    book = read_table(make_xlsx(rows), name="bench.xlsx")
    text = read_table(csv_of(rows), name="bench.csv")
    formula_note = [n for n in book.report.notes if "formula cell" in n]
    assert len(formula_note) == 1 and formula_note[0].startswith("7 formula cells in sheet 'Run 1'")
    assert_same_table(book, text, extra_notes=formula_note)
    # the things the rules found, stated once more against the cells above
    assert book.report.header_line == 4
    assert book.line_numbers.tolist() == [5, 6, 7, 9, 10, 11, 12]  # row 8 is empty, row 13 the mean
    assert book.report.dropped["summary row"].listed_lines == [13]
    assert book.frame["reading (AU)"].tolist()[:3] == [3.41, 3.52, 3.6]  # decimal-comma text read as numbers
    assert book.frame["column 6"].tolist()[4:] == [0.375, 1e-7, 2.0**-20]  # under the merged header cell
    assert any("Column 6 has no name" in n for n in book.report.notes)
    assert any("'taken' holds dates or times" in n for n in book.report.notes)
    assert book.select("conc (mg/L)", "signal (mV)").dropped["missing or non-numeric y"].listed_lines == [9]


def test_ods_reads_like_its_csv_export_with_cached_formula_values():
    rows = sheet_rows(doubled_cached=True)
    book = read_table(make_ods(rows), name="bench.ods")
    text = read_table(csv_of(rows), name="bench.csv")
    assert_same_table(book, text)
    assert book.frame["doubled"].tolist()[1] == 2 * 0.0642  # the formula's saved value
    assert book.report.encoding == "ods workbook"


@pytest.mark.parametrize("make, name", [(make_xlsx, "bench.xlsx"), (make_ods, "bench.ods")])
def test_sheets_are_recorded_and_can_be_chosen(make, name):
    data = make(sheet_rows(doubled_cached=True))
    t = read_table(data, name=name)
    assert t.sheet == "Run 1" and t.sheet_names == ["About", "Run 1"]  # the first sheet holds no table
    d = t.report.to_dict()
    assert d["sheet"] == "Run 1" and d["sheet_names"] == ["About", "Run 1"]
    assert t.to_dict()["sheet_names"] == ["About", "Run 1"]
    assert "sheet 'Run 1'" in t.report.summary_lines()[0]
    assert read_table(data, name=name, sheet=1).sheet == "Run 1"
    assert read_table(data, name=name, sheet="run 1").sheet == "Run 1"
    with pytest.raises(IntakeError, match="no sheet named 'Run 9'"):
        read_table(data, name=name, sheet="Run 9")
    with pytest.raises(IntakeError, match="numbered 0 to 1"):
        read_table(data, name=name, sheet=2)
    with pytest.raises(IntakeError):
        read_table(data, name=name, sheet="About")


def test_workbook_numbers_arrive_bit_for_bit(tmp_path):
    # References: the decimal text the .xlsx stores in each <v> element, read by Python's
    # correctly rounded float(); and python-calamine's own cell values. (openpyxl writes
    # some doubles with fewer digits than repr, so the file, not the array written, is
    # the reference.)
    openpyxl = pytest.importorskip("openpyxl")
    from python_calamine import CalamineWorkbook

    rng = np.random.default_rng(11)
    x = np.sort(rng.uniform(-1e3, 1e3, 200))
    tiny = [5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, 0.1, 1 / 3, -0.0, 1e-7, 2.0**-1074]
    y = np.concatenate([rng.normal(size=192) * 10.0 ** rng.integers(-300, 300, 192), tiny])
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["x", "y"])
    for a, b in zip(x, y, strict=True):
        ws.append([float(a), float(b)])
    p = tmp_path / "exact.xlsx"
    wb.save(p)
    xml = zipfile.ZipFile(p).read("xl/worksheets/sheet1.xml").decode()
    cell = re.compile(r'<c r="([AB])\d+"[^>]*><v>([^<]*)</v>')
    stored = {"A": [], "B": []}
    for col, text in cell.findall(xml):
        stored[col].append(float(text))
    cal = CalamineWorkbook.from_path(str(p)).get_sheet_by_index(0).to_python()[1:]
    t = read_table(p)
    for col, name in (("A", "x"), ("B", "y")):
        got = t.frame[name].to_numpy()
        assert got.tobytes() == np.array(stored[col]).tobytes()
        assert got.tobytes() == np.array([r["AB".index(col)] for r in cal], dtype=np.float64).tobytes()
    assert len(stored["B"]) == 200


def test_dates_as_x_get_the_csv_message():
    openpyxl = pytest.importorskip("openpyxl")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["taken", "level"])
    for i in range(5):
        ws.append([dt.datetime(2024, 3, 1, 8, 0) + dt.timedelta(hours=i), 1.5 * i])
    buf = io.BytesIO()
    wb.save(buf)
    with pytest.raises(IntakeError) as book:
        read_table(buf.getvalue(), name="times.xlsx")
    csv = b"taken,level\n" + b"".join(f"2024-03-01 {8 + i:02d}:00:00,{1.5 * i}\n".encode() for i in range(5))
    with pytest.raises(IntakeError) as text:
        read_table(csv, name="times.xlsx.csv")
    assert "'taken' holds dates or times" in str(book.value)
    assert str(book.value).split("'", 2)[2] == str(text.value).split("'", 2)[2]


def test_renamed_png_is_refused_by_what_it_is():
    png = b"\x89PNG\r\n\x1a\n" + b"\x00" * 64
    for name in ("plot.xlsx", "plot.ods", "plot.xls", "plot.xlsm"):
        with pytest.raises(IntakeError) as info:
            read_table(png, name=name)
        msg = str(info.value)
        assert "is named as a" in msg and "a PNG image" in msg and "not a workbook" in msg


def test_text_saved_under_a_workbook_name_is_read_as_text():
    t = read_table(b"x\ty\n1\t2\n2\t3\n3\t5\n", name="export.xls")
    assert t.report.delimiter == "\t" and t.sheet is None


def test_password_protected_workbook_is_refused_with_a_sentence():
    # An encrypted Office file is an OLE2 container holding an "EncryptionInfo" stream; the
    # directory entry names are UTF-16. Only the refusal path is checked, on a minimal container.
    ole = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 500 + "EncryptionInfo".encode("utf-16-le") + b"\x00" * 500
    for name in ("locked.xlsx", "locked.xls", "upload"):
        with pytest.raises(IntakeError, match="password-protected"):
            read_table(ole, name=name)


def test_damaged_legacy_workbook_is_refused():
    ole = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 1000
    with pytest.raises(IntakeError, match="could not be opened as an xls workbook"):
        read_table(ole, name="old.xls")
    with pytest.raises(IntakeError, match="an .xls spreadsheet"):
        read_table(ole, name="old.csv")


def test_text_file_has_no_sheets():
    with pytest.raises(IntakeError, match="has no sheets"):
        read_table(b"x,y\n1,2\n2,3\n", sheet=0)


@pytest.mark.parametrize(
    "pasted, decimal",
    [
        ("conc (mg/L)\tsignal\n0\t0.013\n0.5\t0.064\n1\t0.119\n2\t0.224\n", "."),
        ("conc (mg/L)\tsignal\n0\t0,013\n0,5\t0,064\n1\t0,119\n2\t0,224\n", ","),
        ("conc (mg/L)\tsignal\r\n0\t0,013\r\n0,5\t0,064\r\n1\t0,119\r\n2\t0,224", ","),
    ],
)
def test_pasted_table_reads_with_either_decimal_mark(pasted, decimal):
    t = read_table(pasted.encode("utf-8"), name="pasted table")
    assert t.report.source_name == "pasted table" and t.report.delimiter == "\t"
    assert t.report.decimal == decimal
    sel = t.select()
    assert sel.x.tolist() == [0.0, 0.5, 1.0, 2.0] and sel.y.tolist() == [0.013, 0.064, 0.119, 0.224]
    assert sel.x_unit == "mg/L"


def test_unknown_sheet_column_error_is_still_a_column_error():
    data = make_xlsx(sheet_rows(doubled_cached=False))
    with pytest.raises(ColumnError, match="no column named 'nope'"):
        read_table(data, name="bench.xlsx").select("nope")


def test_the_ods_made_here_holds_formulas_and_a_merged_cell():
    # a check of the test's own workbook: without these the test above would prove less
    content = zipfile.ZipFile(io.BytesIO(make_ods(sheet_rows(doubled_cached=True)))).read("content.xml").decode()
    assert content.count('table:formula="of:=[.B') == 6
    assert 'table:number-columns-spanned="2"' in content


def test_one_column_sheet_reads_through_read_values():
    openpyxl = pytest.importorskip("openpyxl")
    from fitting import read_values

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["x values to predict at (invented)"])
    ws.append([])
    ws.append(["x (mm)"])
    for v in (0.5, 1.25, 2.0, "n/a", 3.5):
        ws.append([v])
    buf = io.BytesIO()
    wb.save(buf)
    t = read_values(buf.getvalue(), name="predict.xlsx")
    csv = read_values(b"x values to predict at (invented)\n\nx (mm)\n0.5\n1.25\n2\nn/a\n3.5\n", name="predict.csv")
    pd.testing.assert_frame_equal(t.frame, csv.frame, check_exact=True)
    assert t.line_numbers.tolist() == csv.line_numbers.tolist() == [4, 5, 6, 7, 8]
    assert t.report.columns == ["x (mm)"] and t.report.units == {"x (mm)": "mm"} and t.sheet == "Sheet"
    with pytest.raises(IntakeError) as info:
        read_table(buf.getvalue(), name="predict.xlsx")
    assert "Sheet 'Sheet' of 'predict.xlsx' has only one column of values" in str(info.value)
    assert "comma" not in str(info.value)


def test_workbook_is_known_by_its_bytes_and_by_xlsm():
    rows = sheet_rows(doubled_cached=False)
    data = make_xlsx(rows)
    by_name = read_table(data, name="bench.xlsx")
    for name in ("bench.xlsm", None, "upload.bin"):
        t = read_table(data, name=name)
        pd.testing.assert_frame_equal(t.frame, by_name.frame, check_exact=True)
        assert t.sheet == "Run 1"
    ods = make_ods(sheet_rows(doubled_cached=True))
    assert read_table(ods).report.encoding == "ods workbook"
