"""Write the awkward CSV files of the intake test corpus.

Every value in these files is invented for testing; no file comes from a real
instrument, lab or person. The expected results live in manifest.json, written by
hand from the contents below (each file's comment says how its rows are counted).

Run from anywhere:  python tests/data/csv_corpus/make_corpus.py
The outputs are committed; rerunning must reproduce them byte for byte.
"""

from __future__ import annotations

import io
import random
import zipfile
from pathlib import Path

HERE = Path(__file__).resolve().parent


def rows(n, fmt, start=0):
    """n invented rows: i -> fmt.format(i=i, t=..., v=...) with simple arithmetic."""
    out = []
    for i in range(start, start + n):
        t = i * 0.5
        v = 1.0 + 0.8 * t + 0.05 * t * t
        out.append(fmt.format(i=i, t=t, v=v, w=2.0 * i + 1.0))
    return out


def lines(*parts, end="\n"):
    flat = []
    for p in parts:
        flat.extend(p if isinstance(p, list) else [p])
    return end.join(flat) + end


def comma_dec(x, digits):
    return f"{x:.{digits}f}".replace(".", ",")


FILES: dict[str, bytes] = {}

# 01: 20 clean rows, header on line 1.
FILES["01_clean_comma.csv"] = lines("time_s,signal_mV", rows(20, "{t:.1f},{v:.4f}")).encode()

# 02: UTF-8 with BOM, units with non-ASCII characters, 12 rows.
FILES["02_utf8_bom.csv"] = b"\xef\xbb\xbf" + lines(
    "Temperatur (°C),Widerstand (Ω)",
    [f"{10 + 5 * i},{1000 + 3.9 * 5 * i:.1f}" for i in range(12)],
).encode("utf-8")

# 03: UTF-16 LE with BOM, tab-delimited, CRLF line ends (a "Unicode text" export), 10 rows.
FILES["03_utf16le_bom_tab.txt"] = "\ufeff".encode("utf-16-le") + lines(
    "speed_rpm\tflow (L/min)",
    [f"{500 + 250 * i}\t{0.8 + 0.61 * i:.2f}" for i in range(10)],
    end="\r\n",
).encode("utf-16-le")

# 04: UTF-16 BE with BOM, ';' with decimal comma, 8 rows.
FILES["04_utf16be_bom_semicolon.csv"] = "\ufeff".encode("utf-16-be") + lines(
    "Zeit (s);Spannung (V)",
    [f"{comma_dec(0.25 * i, 2)};{comma_dec(3.3 - 0.12 * i, 3)}" for i in range(8)],
).encode("utf-16-be")

# 05: Windows-1252: 0xB0 is the degree sign, 0xB5 the micro sign, 0xE4 is a-umlaut. 10 rows.
FILES["05_cp1252_units.csv"] = lines(
    "Temperatur (°C);Leitfähigkeit (µS/cm)",
    [f"{comma_dec(15 + 1.5 * i, 1)};{comma_dec(412 + 8.25 * i, 2)}" for i in range(10)],
).encode("cp1252")

# 06: ';' with decimal comma, 15 rows.
FILES["06_semicolon_decimal_comma.csv"] = lines(
    "Konzentration (mg/L);Extinktion",
    [f"{comma_dec(0.5 * (i + 1), 1)};{comma_dec(0.112 * (i + 1) + 0.003, 3)}" for i in range(15)],
).encode()

# 07: tab-delimited, 10 rows.
FILES["07_tab.tsv"] = lines("x\ty", [f"{i}\t{i * i / 4:.2f}" for i in range(10)]).encode()

# 08: '|' with spaces around the fields, 9 rows.
FILES["08_pipe_spaces.txt"] = lines(
    "depth_m | pressure_kPa", [f"{2 * i:>4} | {101.3 + 9.81 * 2 * i:8.2f}" for i in range(9)]
).encode()

# 09: quoted numbers with ',' thousands separators in a ','-delimited file, 10 rows.
FILES["09_thousands_quoted.csv"] = lines(
    "load_N,extension_um",
    [f'"{1250 * (i + 1):,.1f}",{12.5 * (i + 1):.1f}' for i in range(10)],
).encode()

# 10: '.' thousands with decimal comma, ';', 8 rows.
FILES["10_thousands_dot_decimal_comma.csv"] = lines(
    "Masse (g);Volumen (mL)",
    [
        f"{1250.5 * (i + 1):,.1f}".replace(",", "_").replace(".", ",").replace("_", ".")
        + ";"
        + comma_dec(3.2 * (i + 1), 1)
        for i in range(8)
    ],
).encode()

# 11: space and no-break-space digit grouping with decimal comma, ';', 6 rows.
FILES["11_thousands_space.csv"] = lines(
    "Druck (Pa);Hoehe (m)",
    "1 250,5;10,0",
    "2 501,0;20,0",
    "3\u00a0751,5;30,0",
    "5\u202f002,0;40,0",
    "6 252,5;50,0",
    "7 503,0;60,0",
).encode()

# 12: unicode minus (U+2212) and a leading '+', 10 rows.
FILES["12_unicode_minus_plus.csv"] = lines(
    "offset_mm,error_um",
    [
        ("\u2212" if i % 2 else "+") + f"{0.5 * i:.1f}," + ("\u2212" if i % 3 == 0 else "") + f"{1.25 * i:.2f}"
        for i in range(10)
    ],
).encode()

# 13: scientific notation, 8 rows.
FILES["13_scientific.csv"] = lines(
    "dose_Gy,signal",
    "1.0E-3,4.5e+2",
    "2.0E-3,9.1e+2",
    "5.0e-3,2.25E3",
    "1.0e-2,4.4E+03",
    "2.0E-2,8.9e3",
    "5.0E-2,2.2e+04",
    "1e-1,4.41E4",
    "2E-1,8.8e4",
).encode()

# 14: scientific notation with decimal comma, ';', 8 rows.
FILES["14_scientific_decimal_comma.csv"] = lines(
    "Dosis (Gy);Signal",
    "1,0E-3;4,5e2",
    "2,0E-3;9,1e2",
    "5,0e-3;2,25E3",
    "1,0e-2;4,4E+03",
    "2,0E-2;8,9e3",
    "5,0E-2;2,2e+04",
    "1e-1;4,41E4",
    "2E-1;8,8e4",
).encode()

# 15: '#', '//' and ';' comments above the header (lines 1-4), header on line 5,
# 6 rows, a comment on line 12, 6 more rows: 12 data rows.
FILES["15_hash_comments.csv"] = lines(
    "# Bench log (invented data)",
    "# operator: test",
    "// exported by logger v0",
    "; settings block",
    "x,y",
    rows(6, "{i},{v:.3f}"),
    "# recalibrated here",
    rows(6, "{i},{v:.3f}", start=6),
).encode()

# 16: key/value metadata with fewer fields, header on line 6, 10 rows.
FILES["16_key_value_metadata.csv"] = lines(
    "Instrument: XYZ-100 (invented)",
    "Date,2026-01-01",
    "Operator,A. Tester",
    "Serial No.: 0042",
    "",
    "time_s,temp_C,pressure_kPa",
    [f"{10 * i},{20 + 0.4 * i:.1f},{101.3 + 0.2 * i:.2f}" for i in range(10)],
).encode()

# 17: blank lines everywhere; header on line 3; data rows on lines 4,6,7,9,10,12,13,14,15.
FILES["17_blank_lines.csv"] = lines(
    "",
    "",
    "x,y",
    "1,1",
    "",
    "2,4",
    "3,9",
    ",,",
    "4,16",
    "5,25",
    "   ",
    "6,36",
    "7,49",
    "8,64",
    "9,81",
    "",
    "",
).encode()

# 18: ragged rows: lines 4 and 9 have extra non-empty fields, line 6 extra empty ones,
# line 8 has only x. 12 data rows (lines 2-13); line 8 lacks y.
FILES["18_ragged_extra.csv"] = lines(
    "x,y",
    "1,2",
    "2,4",
    "3,6,extra",
    "4,8",
    "5,10,,",
    "6,12",
    "7",
    "8,16,a,b",
    "9,18",
    "10,20",
    "11,22",
    "12,24",
).encode()

# 19: 10 rows (lines 2-11), then summary rows on lines 12-14 and a note on line 15.
FILES["19_trailing_summary.csv"] = lines(
    "pos_mm,force_N,temp_C",
    [f"{i},{2.5 * i + 0.1:.2f},{21 + 0.1 * i:.1f}" for i in range(10)],
    "Mean,4.5,11.35,21.45",
    "Std,3.03,7.57,0.30",
    "Total,45,113.5,214.5",
    "Note: values are invented for testing",
).encode()

# 20: rows of text in the middle: 6 rows, a text line (8), a repeated header (9),
# 6 rows, a text line (16). 15 data rows, 12 used.
FILES["20_text_rows_middle.csv"] = lines(
    "x,y",
    rows(6, "{i},{v:.2f}"),
    "--- run 2 ---",
    "x,y",
    rows(6, "{i},{v:.2f}", start=6),
    "End of data",
).encode()

# 21: missing markers: line 2 good, lines 3-13 have a missing y (11 markers), line 14
# a missing x written #N/A at the start of the line, lines 15-23 good (9 rows).
FILES["21_missing_markers.csv"] = lines(
    "x,y",
    "1,10.5",
    "2,",
    "3,NA",
    "4,N/A",
    "5,n/a",
    "6,-",
    "7,#N/A",
    "8,NaN",
    "9,nan",
    "10,null",
    "11,NULL",
    "12,None",
    "#N/A,5.0",
    [f"{13 + i},{10.5 + 2 * i:.1f}" for i in range(9)],
).encode()

# 22: infinities: lines 2-11 good, lines 12-19 infinite y (8 spellings), line 20 infinite x.
FILES["22_infinities.csv"] = lines(
    "x,y",
    [f"{i},{3 * i - 1}" for i in range(10)],
    "11,inf",
    "12,-inf",
    "13,Infinity",
    "14,-Infinity",
    "15,INF",
    "16,+inf",
    "17,\u221e",
    "18,\u2212\u221e",
    "inf,3.0",
).encode()

# 23: duplicate column names, 8 rows.
FILES["23_duplicate_columns.csv"] = lines(
    "x,y,y,y", [f"{i},{i + 0.1:.1f},{i + 0.2:.1f},{i + 0.3:.1f}" for i in range(8)]
).encode()

# 24: no header at all, 3 columns, 10 rows.
FILES["24_no_header.csv"] = lines([f"{i},{2 * i + 0.5},{i * i}" for i in range(10)]).encode()

# 25: units in the header in three notations, 6 rows.
FILES["25_units_in_header.csv"] = lines(
    "t [s],U [mV],I / mA,Flow (L/min)",
    [f"{i},{100 + 5 * i},{0.5 * i:.1f},{1.2 + 0.1 * i:.1f}" for i in range(6)],
).encode()

# 26: names on line 1, units on line 2, 7 rows (lines 3-9).
FILES["26_units_row.csv"] = lines(
    "time,voltage,current",
    "(s),(V),[mA]",
    [f"{i},{0.1 * i:.1f},{2 * i}" for i in range(7)],
).encode()

# 27: the header is a comment (line 2), 8 rows on lines 3-10.
FILES["27_comment_header.csv"] = lines(
    "# Logger export (invented)",
    "# t [s], U [mV]",
    [f"{i},{50 + 3 * i}" for i in range(8)],
).encode()

# 28: every data line ends with a delimiter, 9 rows.
FILES["28_trailing_delimiter.csv"] = lines("x,y", [f"{i},{5 - 0.5 * i}," for i in range(9)]).encode()

# 29: a Markdown-style pipe table with a rule line, 6 rows on lines 3-8.
FILES["29_markdown_table.txt"] = lines(
    "| x | y |", "|---|---|", [f"| {i} | {i * 1.5:.1f} |" for i in range(6)]
).encode()

# 30: a text group column, 12 rows.
FILES["30_group_text_column.csv"] = lines(
    "site,depth_m,temp_C",
    [f"{['North', 'South', 'East'][i % 3]},{i},{14.0 - 0.35 * i:.2f}" for i in range(12)],
).encode()

# 31: CRLF line ends, 10 rows.
FILES["31_crlf.csv"] = lines("x,y", [f"{i},{i / 8:.3f}" for i in range(10)], end="\r\n").encode()

# 32: CR-only line ends (old Mac), 10 rows.
FILES["32_cr_only.csv"] = lines("x,y", [f"{i},{i / 8:.3f}" for i in range(10)], end="\r").encode()

# 33: quoted fields that run over lines: rows start on lines 2, 4, 5, 6, 7, 10.
FILES["33_quoted_multiline.csv"] = (
    "x,y,id,comment\n"
    '0.5,1.2,1,"calibrated\n'
    'before run"\n'
    "1.0,2.3,2,ok\n"
    '1.5,3.1,3,"a, b"\n'
    "2.0,4.4,4,\n"
    '2.5,5.2,5,"multi\n'
    "line\n"
    'note"\n'
    "3.0,6.5,6,done\n"
).encode()

# 34: cells that are not numbers: lines 2-11 good, lines 12-15 bad y.
FILES["34_unparseable_cells.csv"] = lines(
    "x,y",
    [f"{i},{7 + 0.5 * i}" for i in range(10)],
    "11,abc",
    "12,12..3",
    "13,<0.5",
    "14,12.5 mV",
).encode()

# 35: spreadsheet error codes: lines 2-9 good, y errors on 10-11, x error at line start on 12.
FILES["35_excel_errors.csv"] = lines(
    "x,y",
    [f"{i},{1 + i * 0.25}" for i in range(8)],
    "9,#DIV/0!",
    "10,#VALUE!",
    "#REF!,3.0",
).encode()

# 36: UTF-16 LE without a byte-order mark, 7 rows.
FILES["36_utf16le_no_bom.csv"] = lines("x,y", [f"{i},{i * 0.3:.1f}" for i in range(7)]).encode("utf-16-le")

# 37: a messy export. Metadata lines 1-3, blank 4, header 5 (a duplicate name), data
# rows on lines 6,7,9,11-20 (13 rows; comment on 8, blank on 10). Line 12 lacks y,
# line 13 has an extra field, line 16 uses '.' grouping, line 17 a unicode minus,
# lines 18-19 are summary rows (German words), line 20 is a text row.
FILES["37_lab_export_messy.csv"] = lines(
    "Messprotokoll – Prüfstand B (erfundene Daten)",
    "Datum;2026-03-14",
    "Gerät;ABC-7;Seriennr.;0815",
    "",
    "Zeit (s);Kraft (N);Kraft (N);Bemerkung",
    "0,0;0,00;0,01;",
    "0,5;1,25;1,24;ok",
    "# Sensor nachjustiert",
    "1,0;2,51;2,49;",
    "",
    "1,5;3,74;NA;",
    "2,0;;5,02;Wert fehlt",
    "2,5;6,26;6,25;ok;extra",
    "3,0;7,49;7,51;",
    "3,5;8,77;8,74;",
    "4,0;1.002,5;9,98;Tausender",
    "4,5;\u221211,2;11,3;",
    "Mittelwert;4,1;4,9;",
    "Summe;40,5;49,2;",
    "Hinweis: erfundene Daten",
).encode()

# 38: two numeric columns among text columns, 10 rows (one remark holds a quoted comma).
FILES["38_wide_text_columns.csv"] = lines(
    "sample_id,operator,date,temp_C,reading_mV,remark",
    [
        f"S-{i + 1:03d},A. Tester,2026-01-{5 + i:02d},{20 + 0.5 * i:.1f},{101.2 + 1.7 * i:.1f},"
        + ('"drift, small"' if i == 4 else "ok")
        for i in range(10)
    ],
).encode()

# 39: ','-delimited with quoted decimal-comma numbers, 6 rows.
FILES["39_quoted_decimal_comma.csv"] = lines(
    '"Zeit","Wert"', [f'"{comma_dec(0.5 * i, 1)}","{comma_dec(1.25 * i + 0.5, 2)}"' for i in range(6)]
).encode()

# 40: 520 comment lines before the header (line 521), then 5 rows.
FILES["40_long_preamble.csv"] = lines(
    [f"# preamble line {i + 1} of an invented logger" for i in range(520)],
    "x,y",
    [f"{i},{2 * i}" for i in range(5)],
).encode()

# Files that must be refused, or whose x cannot carry a curve.
FILES["e01_empty.csv"] = b""
FILES["e02_whitespace_only.csv"] = b"\n\n   \n\t\n"
FILES["e03_header_only.csv"] = b"time_s,signal_mV\n"
FILES["e04_single_column.csv"] = lines("reading", ["1.5", "2.5", "3.5", "4.5"]).encode()
FILES["e05_one_numeric_column.csv"] = lines("label,value", ["a,1", "b,2", "c,3", "d,4"]).encode()
FILES["e06_png_renamed.csv"] = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x01\x00\x00\x00\x01\x08\x02"


def _tiny_zip() -> bytes:
    buf = io.BytesIO()
    info = zipfile.ZipInfo("[Content_Types].xml", date_time=(2026, 1, 1, 0, 0, 0))
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_STORED) as zf:
        zf.writestr(info, '<?xml version="1.0"?><Types/>')
    return buf.getvalue()


FILES["e07_xlsx_renamed.csv"] = _tiny_zip()
FILES["e08_nul_bytes.csv"] = b"x,y\n1,2\n\x00\x00\x00garbage\n"
FILES["e09_invalid_bytes.csv"] = b"x,y\n1,2\n\x81\x8d\x8f\x90\x9d,3\n"
FILES["e10_only_comments.csv"] = lines("# nothing here", "// still nothing", "# end").encode()
FILES["e11_constant_x.csv"] = lines("x,y", [f"5.0,{i * 1.1:.1f}" for i in range(6)]).encode()
FILES["e12_all_text.csv"] = lines("a,b", "c,d", "e,f", "g,h").encode()
FILES["e13_random_binary.bin"] = random.Random(20260101).randbytes(4096)


def main() -> None:
    for name, data in FILES.items():
        (HERE / name).write_bytes(data)
    print(f"wrote {len(FILES)} files to {HERE}")


if __name__ == "__main__":
    main()
