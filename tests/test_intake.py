"""Tests of fitting.intake: the corpus of awkward files, and the parsing rules one by one.

The corpus files are invented (see tests/data/csv_corpus/make_corpus.py); their expected
results in manifest.json were worked out by hand from the file contents. Where a check
compares with pandas.read_csv, pandas is the outside reference, named at the check.
"""

from __future__ import annotations

import contextlib
import hashlib
import importlib.util
import io
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import fitting
import fitting.intake
from fitting import (
    DEFAULT_MAX_BYTES,
    MAX_COLUMNS,
    ColumnError,
    DegreescopeError,
    DropInfo,
    FileTooLargeError,
    FitError,
    IntakeError,
    IntakeReport,
    Selection,
    Table,
    read_table,
)
from fitting.intake import unit_of

CORPUS = Path(__file__).parent / "data" / "csv_corpus"
MANIFEST = json.loads((CORPUS / "manifest.json").read_text(encoding="utf-8"))["files"]
NOT_DATA = {"make_corpus.py", "manifest.json", "README.md", "__pycache__"}
OK_ENTRIES = [e for e in MANIFEST if "error" not in e]
ERR_ENTRIES = [e for e in MANIFEST if "error" in e]


def _general(source, **kw) -> Table:
    """Read with the fast path switched off (the general path only)."""
    return read_table(
        source, max_bytes=kw.pop("max_bytes", DEFAULT_MAX_BYTES), name=kw.pop("name", None), fast_path=False
    )


# --------------------------------------------------------------------------- the corpus


def test_manifest_lists_every_corpus_file_once():
    on_disk = sorted(p.name for p in CORPUS.iterdir() if p.name not in NOT_DATA)
    listed = [e["file"] for e in MANIFEST]
    assert sorted(listed) == on_disk
    assert len(set(listed)) == len(listed)
    assert len(on_disk) >= 30


def test_generator_reproduces_the_committed_files():
    spec = importlib.util.spec_from_file_location("make_corpus", CORPUS / "make_corpus.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    for name, data in mod.FILES.items():
        assert (CORPUS / name).read_bytes() == data, name


@pytest.mark.parametrize("entry", OK_ENTRIES, ids=[e["file"] for e in OK_ENTRIES])
def test_corpus_file(entry):
    path = CORPUS / entry["file"]
    table = read_table(path)
    rep = table.report
    assert rep.source_name == entry["file"]
    for key in ("encoding", "delimiter", "decimal", "thousands", "header_line", "rows_read"):
        if key in entry:
            assert getattr(rep, key) == entry[key], key
    for key in ("columns", "numeric_columns"):
        if key in entry:
            assert getattr(rep, key) == entry[key], key
    if "units" in entry:
        assert {c: rep.units[c] for c in entry["units"]} == entry["units"]
    for col, expected in entry.get("values", {}).items():
        got = table.frame[col].to_numpy()[: len(expected)]
        np.testing.assert_allclose(got, expected, rtol=1e-12, atol=0)
    if "line_numbers" in entry:
        assert table.line_numbers.tolist() == entry["line_numbers"]
    for text in entry.get("note_contains", []):
        assert any(text in n for n in rep.notes), (text, rep.notes)

    if "select_error" in entry:
        with pytest.raises(getattr(fitting, entry["select_error"])) as info:
            table.select()
        assert entry["message"] in str(info.value)
        return
    assert table.default_xy() == (entry["x"], entry["y"])
    sel = table.select()
    assert (sel.x_name, sel.y_name) == (entry["x"], entry["y"])
    assert sel.rows_used == entry["rows_used"]
    assert sel.x.size == sel.y.size == sel.rows_used
    assert np.isfinite(sel.x).all() and np.isfinite(sel.y).all()
    # Exact accounting: every data row is either used or counted under one reason.
    assert sel.rows_used + sel.rows_dropped == rep.rows_read
    assert sum(d.count for d in sel.dropped.values()) == sel.rows_dropped
    assert len(table.frame) == rep.rows_read - sum(d.count for d in rep.dropped.values())
    if "dropped" in entry:
        assert {k: v.count for k, v in sel.dropped.items()} == entry["dropped"]
    for reason, first in entry.get("dropped_lines", {}).items():
        assert sel.dropped[reason].first_lines == first
    if "x" in entry and entry["x"] in rep.units:
        assert sel.x_unit == rep.units[entry["x"]]
    json.dumps(rep.to_dict(), allow_nan=False)
    json.dumps(sel.to_dict(include_arrays=True), allow_nan=False)
    assert all(isinstance(s, str) and s.endswith(".") for s in rep.summary_lines())


@pytest.mark.parametrize("entry", ERR_ENTRIES, ids=[e["file"] for e in ERR_ENTRIES])
def test_corpus_error_file(entry):
    cls = getattr(fitting, entry["error"])
    with pytest.raises(cls) as info:
        read_table(CORPUS / entry["file"])
    msg = str(info.value)
    assert entry["message"] in msg
    assert entry["file"] in msg  # the message names the file
    # One sentence: no sentence break inside, ends with a full stop.
    assert msg.endswith(".") and ". " not in msg.rstrip(".")


@pytest.mark.parametrize("entry", OK_ENTRIES, ids=[e["file"] for e in OK_ENTRIES])
def test_fast_and_general_paths_agree(entry):
    path = CORPUS / entry["file"]
    fast, general = read_table(path), _general(path)
    pd.testing.assert_frame_equal(fast.frame, general.frame, check_exact=True)
    assert fast.report == general.report
    assert fast.line_numbers.tolist() == general.line_numbers.tolist()


COMPARE = [e for e in OK_ENTRIES if "compare_pandas" in e]


@pytest.mark.parametrize("entry", COMPARE, ids=[e["file"] for e in COMPARE])
def test_clean_files_match_pandas_read_csv(entry):
    # Outside reference: pandas.read_csv with its default C engine. (In pandas 3.1 its
    # default number parser agrees with Python's correctly rounded float(), seen on
    # 200,000 random values while writing this test.)
    path = CORPUS / entry["file"]
    ref = pd.read_csv(path, **entry["compare_pandas"])
    ref = ref.astype(np.float64)
    ours = read_table(path).frame
    assert list(ours.columns) == list(ref.columns)
    pd.testing.assert_frame_equal(ours, ref, check_exact=True, check_column_type=False)


def test_reading_never_changes_the_file():
    for entry in MANIFEST:
        path = CORPUS / entry["file"]
        before = hashlib.sha256(path.read_bytes()).hexdigest()
        mtime = path.stat().st_mtime_ns
        with contextlib.suppress(DegreescopeError):
            read_table(path)
        assert hashlib.sha256(path.read_bytes()).hexdigest() == before
        assert path.stat().st_mtime_ns == mtime


# --------------------------------------------------------------------------- numbers


def _col(text: str, col: str = "y", **kw) -> np.ndarray:
    return read_table(text.encode("utf-8"), **kw).frame[col].to_numpy()


def test_unicode_minus_and_leading_plus():
    v = _col("x,y\n1,\u22121.5\n2,+2.25\n3,\u22123e\u22122\n4,-4\n")
    assert v.tolist() == [-1.5, 2.25, -0.03, -4.0]


def test_thousands_with_decimal_point_need_groups_of_three():
    t = read_table(b'x,y\n1,"1,250.0"\n2,"12,500"\n3,"1,25"\n4,"1,2345"\n5,"1,250,000.5"\n')
    assert t.report.thousands == ","
    v = t.frame["y"].to_numpy()
    assert v[0] == 1250.0 and v[1] == 12500.0 and v[4] == 1250000.5
    assert np.isnan(v[2]) and np.isnan(v[3])  # "1,25" and "1,2345" are not grouped digits
    assert any("2 values are not a number" in n for n in t.report.notes)


def test_thousands_dot_with_decimal_comma():
    t = read_table("a;b\n1;1.250,5\n2;12.500\n3;3,5\n4;1.2\n".encode())
    assert (t.report.decimal, t.report.thousands) == (",", ".")
    v = t.frame["b"].to_numpy()
    assert v[:3].tolist() == [1250.5, 12500.0, 3.5]
    assert np.isnan(v[3])  # a '.' decimal inside a decimal-comma file is not a number


def test_space_and_no_break_space_grouping():
    t = read_table("a\tb\n1\t1 250\n2\t2\u00a0500.5\n3\t3\u202f000\n4\t7.5\n".encode())
    assert t.report.thousands == " "
    assert t.frame["b"].tolist() == [1250.0, 2500.5, 3000.0, 7.5]


def test_decimal_comma_with_exponent():
    t = read_table("a;b\n1;4,5e2\n2;1,2E-3\n3;\u22127,5e+1\n4;0,5\n".encode())
    assert t.report.decimal == ","
    assert t.frame["b"].tolist() == [450.0, 0.0012, -75.0, 0.5]


def test_ambiguous_comma_in_semicolon_file_is_a_decimal_comma():
    t = read_table(b"a;b\n1;1,250\n2;2,500\n3;3,750\n")
    assert t.report.decimal == ","
    assert t.frame["b"].tolist() == [1.25, 2.5, 3.75]


def test_missing_markers_are_missing_not_unparseable():
    markers = [
        "",
        "NA",
        "N/A",
        "n/a",
        "-",
        "--",
        "#N/A",
        "NaN",
        "nan",
        "null",
        "NULL",
        "None",
        "nUlL",
        "MISSING",
        "n.a.",
    ]
    body = "x,y\n" + "".join(f"{i},{m}\n" for i, m in enumerate(markers)) + "100,1\n101,2\n"
    t = read_table(body.encode())
    v = t.frame["y"].to_numpy()
    assert np.isnan(v[: len(markers)]).all() and v[-2:].tolist() == [1.0, 2.0]
    assert not any("not a number" in n for n in t.report.notes)
    sel = t.select()
    assert sel.rows_used == 2
    assert sel.dropped["missing or non-numeric y"].count == len(markers)


def test_infinities_are_read_and_dropped_with_their_own_reason():
    t = read_table("x,y\n0,1\n1,inf\n2,-Infinity\n3,+\u221e\n4,2\ninf,3\n5,1e999\n".encode())
    v = t.frame["y"].to_numpy()
    assert v[1] == math.inf and v[2] == -math.inf and v[3] == math.inf and v[6] == math.inf
    sel = t.select()
    assert sel.rows_used == 2
    assert sel.dropped["infinite y"] == DropInfo(4, [3, 4, 5, 8])
    assert sel.dropped["infinite x"] == DropInfo(1, [7])


def test_scientific_notation_variants():
    assert _col("x,y\n1,1.2E-3\n2,4.5e+2\n3,.5e1\n4,5.E0\n5,7e2\n").tolist() == [0.0012, 450.0, 5.0, 5.0, 700.0]


def test_values_match_python_float_for_many_decimal_strings():
    # Outside reference: Python's float(), which rounds correctly (IEEE 754).
    rng = np.random.default_rng(7)
    vals = rng.normal(scale=1e3, size=500) * 10.0 ** rng.integers(-12, 12, size=500)
    strs = [repr(float(v)) for v in vals]
    body = "x,y\n" + "".join(f"{i},{s}\n" for i, s in enumerate(strs))
    for reader in (read_table, _general):
        got = reader(body.encode()).frame["y"].to_numpy()
        assert got.tolist() == [float(s) for s in strs]


# --------------------------------------------------------------------------- structure


def test_duplicate_names_are_renamed_and_noted():
    t = read_table(b"x,y,y,x,y (2)\n1,2,3,4,5\n2,3,4,5,6\n3,4,5,6,7\n")
    assert t.report.columns == ["x", "y", "y (2)", "x (2)", "y (2) (2)"]
    assert sum("appears more than once" in n for n in t.report.notes) == 3


def test_units_parsing_rules():
    unit = unit_of
    assert unit("Temperatur (°C)") == "°C"
    assert unit("v [mV]") == "mV"
    assert unit("I / mA") == "mA"
    assert unit("Flow (L/min)") == "L/min"
    assert unit("Sample (2)") is None
    assert unit("(s)") is None  # a bracket alone names nothing
    assert unit("time_s") is None
    assert unit("ratio a/b") is None
    assert unit("x ()") is None


def test_units_reach_the_selection():
    t = read_table("Temperatur (°C);Widerstand [kΩ]\n20;1,1\n25;1,2\n30;1,3\n".encode())
    sel = t.select()
    assert (sel.x_unit, sel.y_unit) == ("°C", "kΩ")


def test_header_found_below_metadata_with_the_same_field_count():
    text = "Operator,A. Tester\nSamples,500\nRate,10\ntime,volts\n0,1.5\n1,2.5\n2,3.5\n3,4.5\n"
    t = read_table(text.encode())
    assert t.report.header_line == 4
    assert t.report.columns == ["time", "volts"]
    assert t.report.rows_read == 4
    assert any("lines 1–3" in n for n in t.report.notes)


def test_header_with_fewer_fields_is_metadata_not_a_header():
    # "Date,2026-01-01" has 2 fields in a 3-field file: metadata, so no header.
    t = read_table(b"Date,2026-01-01\n1,2,3\n2,3,4\n3,4,5\n")
    assert t.report.header_line == 0
    assert t.report.columns == ["column 1", "column 2", "column 3"]
    assert t.line_numbers.tolist() == [2, 3, 4]


def test_no_header_is_noted():
    t = read_table(b"1,2\n2,4\n3,6\n")
    assert t.report.header_line == 0
    assert t.report.columns == ["column 1", "column 2"]
    assert any("No header line" in n for n in t.report.notes)


def test_comment_lines_inside_data_are_skipped_and_noted():
    t = read_table(b"x,y\n1,1\n# pause\n2,2\n// note\n3,3\n")
    assert t.report.rows_read == 3
    assert t.line_numbers.tolist() == [2, 4, 6]
    assert any("2 comment lines inside the data (lines 3, 5)" in n for n in t.report.notes)


def test_spreadsheet_error_at_line_start_is_data_not_comment():
    t = read_table(b"x,y\n#N/A,1\n1,2\n2,3\n3,4\n")
    assert t.report.rows_read == 4
    sel = t.select()
    assert sel.dropped["missing or non-numeric x"] == DropInfo(1, [2])


def test_dropped_lines_keep_first_five_in_file_order_and_full_count():
    body = "x,y\n" + "".join(f"{i},{'NA' if i % 2 else i}\n" for i in range(20))
    sel = read_table(body.encode()).select()
    info = sel.dropped["missing or non-numeric y"]
    assert info.count == 10
    assert info.first_lines == [3, 5, 7, 9, 11]  # rows i=1,3,5,7,9 sit on lines i+2


def test_selection_line_numbers_point_at_the_used_rows():
    sel = read_table(b"x,y\n1,1\n2,NA\n\n3,3\n4,4\n").select()
    assert sel.line_numbers.tolist() == [2, 5, 6]
    assert sel.x.tolist() == [1.0, 3.0, 4.0]


def test_summary_note_and_text_rows_are_dropped_at_intake():
    body = b"x,y\n1,1\n2,2\n3,3\nMean,2,2\nTotal:,6,6\nnote: invented\nsee attached\n4,4\n"
    t = read_table(body)
    assert {k: v.count for k, v in t.report.dropped.items()} == {"summary row": 2, "note row": 1, "text row": 1}
    assert t.report.rows_read == 8
    assert t.select().rows_used == 4


def test_text_column_kept_as_strings_and_usable_as_group():
    t = read_table(b"site,x,y,w\nA,1,2,1\nB,2,3,-1\n,3,4,\nA,4,5,2\n")
    assert t.report.numeric_columns == ["x", "y", "w"]
    assert t.frame["site"].dtype == "str"
    assert t.frame["x"].dtype == np.float64
    sel = t.select("x", "y", weights="w", group="site")
    assert sel.rows_used == 2
    assert sel.group.tolist() == ["A", "A"]
    assert sel.weights.tolist() == [1.0, 2.0]
    assert sel.dropped["negative weights"] == DropInfo(1, [3])
    assert sel.dropped["missing or non-numeric weights"] == DropInfo(1, [4])
    assert sel.rows_used + sel.rows_dropped == t.report.rows_read
    meta = json.loads(json.dumps(sel.to_dict(), allow_nan=False))
    assert "x" not in meta and meta["rows_used"] == 2 and meta["group_name"] == "site"
    full = json.loads(json.dumps(sel.to_dict(include_arrays=True), allow_nan=False))
    assert full["x"] == [1.0, 4.0] and full["group"] == ["A", "A"] and full["line_numbers"] == [2, 5]


def test_numeric_group_gives_float_array():
    sel = read_table(b"x,y,batch\n1,2,1\n2,3,1\n3,4,2\n").select(group="batch")
    assert sel.group.dtype == np.float64 and sel.group.tolist() == [1.0, 1.0, 2.0]


def test_select_defaults_and_partial_choice():
    t = read_table(b"a,b,c\n1,2,3\n2,3,4\n3,4,5\n")
    assert (t.select().x_name, t.select().y_name) == ("a", "b")
    assert (t.select("c").x_name, t.select("c").y_name) == ("c", "a")
    assert (t.select(y="a").x_name, t.select(y="a").y_name) == ("b", "a")


def test_unknown_column_lists_available_names():
    t = read_table(b"site,x,y\nA,1,2\nB,2,3\n")
    with pytest.raises(ColumnError) as info:
        t.select("time", "y")
    msg = str(info.value)
    assert "'time'" in msg and "'site', 'x', 'y'" in msg
    with pytest.raises(ColumnError, match="holds text"):
        t.select("site", "y")
    with pytest.raises(ColumnError):
        t.select("x", "y", group="nope")


def test_fewer_than_two_distinct_x_values_is_a_fit_error():
    t = read_table(b"x,y\n1,1\n1,2\n1,3\nNA,4\n")
    with pytest.raises(FitError) as info:
        t.select()
    assert str(info.value) == (
        "x has fewer than two distinct values; a curve needs at least two. Choose another x column."
    )
    with pytest.raises(FitError, match="No row has finite numbers"):
        read_table(b"x,y\n1,NA\nNA,2\n3,NA\n").select()


def test_ragged_rows_truncated_and_counted():
    t = read_table(b"x,y\n1,1\n2,2,oops\n3,3,,\n4,4,a,b\n5\n6,6\n7,7\n")
    assert t.report.columns == ["x", "y"]
    assert t.report.rows_read == 7
    assert any("2 rows had more fields than the header (lines 3, 5)" in n for n in t.report.notes)
    assert any("1 row had fewer fields than the header (line 6)" in n for n in t.report.notes)
    assert t.select().rows_used == 6


def test_blank_and_delimiter_only_lines_are_not_rows():
    t = read_table(b"\n\nx;y\n;\n1;2\n\n 2;3 \n;;\n3;4\n")
    assert t.report.rows_read == 3
    assert t.line_numbers.tolist() == [5, 7, 9]


def test_quoted_fields_over_several_lines_get_their_first_line():
    t = read_table(b'x,y,c\n1,2,"a\nb"\n2,3,ok\n3,4,"c\n\nd"\n4,5,e\n')
    assert t.line_numbers.tolist() == [2, 4, 5, 8]
    # Lines are classified before quotes are considered, so the blank line inside the
    # third quoted field is skipped like any blank line (module docstring, rule 5).
    assert t.frame["c"].tolist() == ["a\nb", "ok", "c\nd", "e"]
    assert any("run over several lines" in n for n in t.report.notes)


def test_clean_file_uses_the_fast_path(monkeypatch):
    def boom(*a, **k):
        raise AssertionError("the general path was used")

    monkeypatch.setattr(fitting.intake, "parse_general", boom)
    body = "t,v\n" + "".join(f"{i},{i * 0.5}\n" for i in range(1000))
    assert read_table(body.encode()).report.rows_read == 1000
    body = "t;v\n" + "".join(f"{i};{i},5\n" for i in range(1000))  # decimal comma too
    assert read_table(body.encode()).frame["v"].iloc[1] == 1.5


def test_random_clean_table_matches_pandas():
    # Outside reference: pandas.read_csv (default C engine), plus the values themselves:
    # pandas writes floats with repr, so the exact values must come back.
    rng = np.random.default_rng(3)
    df = pd.DataFrame({"a": rng.normal(size=2000), "b": rng.uniform(-1e6, 1e6, size=2000)})
    data = df.to_csv(index=False).encode()
    ref = pd.read_csv(io.BytesIO(data))
    pd.testing.assert_frame_equal(ref, df, check_exact=True)
    pd.testing.assert_frame_equal(read_table(data).frame, ref, check_exact=True)
    pd.testing.assert_frame_equal(_general(data).frame, ref, check_exact=True)


def test_frame_is_plain_and_line_numbers_read_only():
    t = read_table(b"x,y\n1,2\n2,3\n")
    assert isinstance(t.frame.index, pd.RangeIndex)
    with pytest.raises(ValueError):
        t.line_numbers[0] = 99


# --------------------------------------------------------------------------- inputs and errors


def test_bytes_like_inputs_and_names(tmp_path):
    data = b"x,y\n1,2\n2,3\n"
    assert read_table(data).report.source_name == "upload"
    assert read_table(bytearray(data), name="bench.csv").report.source_name == "bench.csv"
    assert read_table(memoryview(data)).report.rows_read == 2
    p = tmp_path / "run 7.csv"
    p.write_bytes(data)
    assert read_table(str(p)).report.source_name == "run 7.csv"
    assert read_table(p, name="shown").report.source_name == "shown"


def test_size_limit_on_bytes_and_paths(tmp_path):
    data = b"x,y\n" + b"1,2\n" * 3000  # 12,004 bytes
    with pytest.raises(FileTooLargeError) as info:
        read_table(data, max_bytes=10_000)
    msg = str(info.value)
    assert "11.7 KiB" in msg and "9.8 KiB" in msg and "max_bytes" in msg
    assert info.value.size_bytes == len(data) and info.value.limit_bytes == 10_000
    p = tmp_path / "big.csv"
    p.write_bytes(data)
    with pytest.raises(FileTooLargeError, match="over the 9.8 KiB size limit"):
        read_table(p, max_bytes=10_000)
    assert read_table(p, max_bytes=len(data)).report.rows_read == 3000
    assert DEFAULT_MAX_BYTES == 512 * 1024 * 1024
    assert "512 MiB" in fitting.intake.__doc__


def test_path_errors(tmp_path):
    with pytest.raises(IntakeError, match="There is no file at"):
        read_table(tmp_path / "absent.csv")
    with pytest.raises(IntakeError, match="is a folder"):
        read_table(tmp_path)
    with pytest.raises(TypeError):
        read_table(12)
    with pytest.raises(ValueError):
        read_table(b"x,y\n1,2\n", max_bytes=0)


@pytest.mark.parametrize(
    "data, text",
    [
        (b"", "is empty"),
        (b"\xef\xbb\xbf", "is empty"),
        (b"x,y\n", "but no data rows"),
        (b"x,y\n\n\n", "but no data rows"),
        (b"x\n1\n2\n", "only one column"),
        (b"name,v\na,1\nb,2\n", "only one numeric column"),
        (b"a,b\nc,d\n", "contains no rows of numbers"),
        (b"PK\x03\x04rest-of-an-xlsx", "looks like a spreadsheet or binary file"),
        (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1legacy", "an .xls spreadsheet"),
        (b"%PDF-1.7\n", "a PDF document"),
        (b"x,y\n1,2\x00\n", "NUL"),
        (b"x,y\n\x01\x02\x03\x04\x05\x06,1\n", "control characters"),
    ],
)
def test_intake_errors_are_one_sentence(data, text):
    with pytest.raises(IntakeError) as info:
        read_table(data, name="sample.csv")
    msg = str(info.value)
    assert text in msg and "'sample.csv'" in msg
    assert msg.endswith(".") and ". " not in msg.rstrip(".")


def test_decoding_errors_never_escape_raw():
    for data in (b"\xff\xfe\x00\xd8x\x00", b"\xfe\xff\xd8\x00", b"x,y\n\x81\x8d\n"):
        with pytest.raises(IntakeError):
            read_table(data)


def test_report_and_types_are_frozen_dataclasses():
    t = read_table(b"x,y\n1,2\n2,3\n")
    assert isinstance(t.report, IntakeReport)
    with pytest.raises(AttributeError):
        t.report.rows_read = 5
    sel = t.select()
    assert isinstance(sel, Selection)
    with pytest.raises(AttributeError):
        sel.rows_used = 0


ODD_TOKENS = [
    "+nan",
    "-nan",
    "nan(1)",
    "NaN(0x1)",
    "nan()",
    "nan( )",
    "snan",
    "infinityx",
    "infinit",
    "inf.",
    "1e",
    "1.e",
    "+.e1",
    "e1",
    "1e+",
    "1E+5",
    "0x1p3",
    "\uff11\uff12",
    "\u0663",
    "+-1",
    "1e1.5",
    ".",
    "+.",
    "5.e-3",
    "-INFINITY",
    "in f",
    "1d5",
    "1f",
    "1_0",
    "0.",
    "-0",
    "00.5e00005",
    " 7 ",
    "\u00a07",
    '"8"',
    '"NA"',
    "1e400",
    "-1e400",
    "1e-400",
]


@pytest.mark.parametrize("token", ODD_TOKENS)
def test_fast_and_general_paths_agree_on_odd_tokens(token):
    # The fast path uses Arrow's CSV float conversion, the general path the documented
    # grammar; a token one of them takes and the other does not would make them differ.
    data = ("x,y\n1,1.5\n2,2.5\n3," + token + "\n4,4.5\n5,5.5\n").encode()
    fast, general = read_table(data), _general(data)
    pd.testing.assert_frame_equal(fast.frame, general.frame, check_exact=True)
    assert fast.report == general.report


def test_delimiter_only_line_is_blank_but_a_row_of_markers_is_data():
    # Found by the fuzz test: Arrow reads "," as a row of nulls.
    for reader in (read_table, _general):
        assert reader(b"x,y\n0.0,0.0\n1,2\n,\n").report.rows_read == 2
        t = reader(b"x,y\n0.0,0.0\n1,2\nNA,NA\n")
        assert t.report.rows_read == 3
        assert t.select().dropped["missing or non-numeric x"] == DropInfo(1, [4])


def test_column_limit_is_a_clear_error():
    wide = (",".join(["1.5"] * (MAX_COLUMNS + 1)) + "\n").encode() * 3
    with pytest.raises(IntakeError, match="10,001 columns, more than the 10,000"):
        read_table(wide)
    ok = (",".join(["1.5"] * 50) + "\n").encode() + (",".join(str(i) for i in range(50)) + "\n").encode()
    assert read_table(ok + ok).frame.shape == (4, 50)


def test_unclosed_quote_names_its_line():
    body = b"x,y,c\n" + b"1,2,ok\n" * 10 + b'3,4,"never closed\n' + b"5,6,ok\n" * 30000
    with pytest.raises(IntakeError) as info:
        read_table(body, name="log.csv")
    assert "on line 12 that opens a field which never closes" in str(info.value)
    # A short stray quote just joins lines into one row, and a note says so.
    t = read_table(b'x,y,c\n1,2,ok\n3,4,"oops\n5,6,ok\n7,8,ok\n')
    assert any("run over several lines" in n for n in t.report.notes)
    assert t.report.rows_read == 2  # line 3 opens a quote that swallows lines 4 and 5
    assert t.line_numbers.tolist() == [2, 3]


def test_date_and_time_columns_get_a_hint():
    with pytest.raises(IntakeError, match="'timestamp' holds dates or times"):
        read_table(b"timestamp,value\n2026-01-01 10:00,1.5\n2026-01-01 10:05,1.7\n2026-01-01T10:10:00Z,1.9\n")
    t = read_table(b"clock,a,b\n10:00:01,1,2\n10:00:02,2,3\n10:00:03,3,5\n")
    assert t.report.numeric_columns == ["a", "b"]
    assert any("'clock' holds dates or times" in n for n in t.report.notes)
    t = read_table(b"site,a,b\nNorth,1,2\nSouth,2,3\n")
    assert not any("dates or times" in n for n in t.report.notes)


def test_numeric_group_with_missing_values_is_json_safe():
    sel = read_table(b"x,y,batch\n1,2,1\n2,3,\n3,4,2\n").select(group="batch")
    assert json.loads(json.dumps(sel.to_dict(include_arrays=True), allow_nan=False))["group"] == [1.0, None, 2.0]


def test_a_fifo_is_refused_without_waiting_for_a_writer(tmp_path):
    import os

    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)  # open() on it would block until something writes
    with pytest.raises(IntakeError, match="not a regular file"):
        read_table(fifo)


def test_read_values_takes_one_column_and_leaves_tables_to_read_table():
    from fitting import read_table, read_values

    one = read_values("# x values\nx (mV)\n450\nn/a\n−900\n1.5e3\nTotal\n".encode("utf-8"), name="xs.csv")
    assert one.report.columns == ["x (mV)"] and one.report.numeric_columns == ["x (mV)"]
    assert one.report.units == {"x (mV)": "mV"} and one.report.delimiter == ""
    values = one.frame["x (mV)"].to_numpy()
    assert values[0] == 450 and np.isnan(values[1]) and values[2] == -900 and values[3] == 1500
    assert "one column" in one.report.summary_lines()[0]
    assert sum(d.count for d in one.report.dropped.values()) == 1  # the trailing "Total" row
    # a real table is read exactly as read_table reads it
    two = b"a,b\n1,2\n3,4\n"
    assert read_values(two).frame.equals(read_table(two).frame)
    with pytest.raises(IntakeError):
        read_values(b"")


# --------------------------------------------------------------------------- column rules


def _counter_table(order: str) -> Table:
    # invented: a standard curve read three times per level; "injection" counts 1, 2, 3
    cols = {"injection": [1, 2, 3] * 4, "conc": [0.0] * 3 + [2.5] * 3 + [5.0] * 3 + [10.0] * 3}
    pairs = zip(cols["injection"], cols["conc"], strict=True)
    cols["signal"] = [round(0.013 + 0.101 * c + 0.0004 * i, 4) for i, c in pairs]
    names = order.split(",")
    body = "\n".join(",".join(str(cols[n][i]) for n in names) for i in range(12))
    return read_table(f"{order}\n{body}\n".encode())


def test_counter_column_is_passed_over_as_default_y():
    sel = _counter_table("conc,injection,signal").select()
    assert (sel.x_name, sel.y_name) == ("conc", "signal")
    assert "'injection'" in sel.choice_note and "counter" in sel.choice_note
    assert sel.to_dict()["choice_note"] == sel.choice_note


def test_counter_column_is_passed_over_as_default_x():
    t = _counter_table("injection,conc,signal")
    sel = t.select()
    assert (sel.x_name, sel.y_name) == ("conc", "signal")
    assert t.default_xy() == ("conc", "signal")
    assert "'injection'" in sel.choice_note


def test_counter_is_used_when_nothing_else_is_left():
    t = read_table(b"conc,rep\n0,1\n1,2\n2,3\n3,1\n4,2\n5,3\n")
    sel = t.select()
    assert (sel.x_name, sel.y_name, sel.choice_note) == ("conc", "rep", None)


def test_named_x_gets_a_default_y_that_is_not_a_counter():
    sel = _counter_table("injection,conc,signal").select("conc")
    assert sel.y_name == "signal" and "'injection'" in sel.choice_note
    sel = _counter_table("conc,injection,signal").select("conc", "injection")  # named: no note
    assert sel.y_name == "injection" and sel.choice_note is None


def test_levels_that_are_not_a_run_are_not_a_counter():
    # calibration levels 0, 1, 2, 5, 10 are whole numbers but not 1, 2, 3, ...: a real x
    t = read_table(b"level,area,height\n0,1.1,3\n1,2.0,4\n2,3.1,5\n5,6.2,6\n10,11.1,7\n0,1.0,3\n1,2.1,4\n")
    sel = t.select()
    assert (sel.x_name, sel.y_name, sel.choice_note) == ("level", "area", None)


def test_same_column_twice_is_refused():
    t = read_table(b"x,y,batch\n1,2,a\n2,3,b\n3,5,a\n")
    with pytest.raises(ColumnError, match="x and y are both 'x'"):
        t.select("x", "x")
    with pytest.raises(ColumnError, match="The group column 'y' is also y"):
        t.select("x", "y", group="y")
    with pytest.raises(ColumnError, match="The group column 'x' is also x"):
        t.select("x", "y", group="X")
    assert t.select("x", "y", group="batch").group.tolist() == ["a", "b", "a"]


def test_names_match_case_insensitively_when_unique():
    t = read_table(b"Conc (mg/L),Signal,signal note\n1,2,a\n2,3,b\n3,5,c\n")
    sel = t.select("conc (MG/L)", "SIGNAL")
    assert (sel.x_name, sel.y_name, sel.x_unit) == ("Conc (mg/L)", "Signal", "mg/L")


def test_ambiguous_case_insensitive_match_is_refused_naming_the_candidates():
    t = read_table(b"t,Signal,SIGNAL\n1,2,4\n2,3,6\n3,5,10\n")
    assert t.select("t", "Signal").y_name == "Signal"  # the exact name wins
    with pytest.raises(ColumnError) as info:
        t.select("t", "signal")
    msg = str(info.value)
    assert "matches 2 columns" in msg and "'Signal'" in msg and "'SIGNAL'" in msg


def test_every_dropped_line_is_listed_for_every_reason():
    # invented: 40 rows; y is "n/a" on every 4th, x empty on every 7th, plus summary rows
    lines = ["x,y"]
    want_y, want_x = [], []
    for i in range(40):
        x = "" if i % 7 == 3 else str(i)
        y = "n/a" if i % 4 == 1 else str(2 * i)
        lines.append(f"{x},{y}")
        if x == "":
            want_x.append(len(lines))
        elif y == "n/a":
            want_y.append(len(lines))
    lines += ["mean,12", "max,40"]
    t = read_table(("\n".join(lines) + "\n").encode())
    sel = t.select("x", "y")
    assert sel.dropped["missing or non-numeric y"].listed_lines == want_y
    assert sel.dropped["missing or non-numeric x"].listed_lines == want_x
    assert sel.dropped["summary row"].listed_lines == [42, 43]
    assert len(want_y) > 5  # more than the five first_lines
    d = sel.to_dict()["dropped"]["missing or non-numeric y"]
    assert d["lines"] == want_y and d["count"] == len(want_y) and d["lines_complete"]
    assert d["first_lines"] == want_y[:5]
    assert t.report.to_dict()["dropped"]["summary row"]["lines"] == [42, 43]
    assert sel.rows_used + sel.rows_dropped == t.report.rows_read


def test_dropped_lines_are_capped_with_the_full_count():
    from fitting.intake import LISTED_LINES

    n = LISTED_LINES + 7
    body = "x,y\n" + "".join(f"{i},NA\n" for i in range(n)) + "1,2\n2,3\n"
    info = read_table(body.encode()).select("x", "y").dropped["missing or non-numeric y"]
    assert info.count == n and len(info.listed_lines) == LISTED_LINES
    assert info.listed_lines[:3] == [2, 3, 4]
    assert not info.to_dict()["lines_complete"]


def test_docstring_examples_run():
    # the numpydoc Examples of the public intake functions (also: pytest --doctest-modules fitting/intake)
    import doctest

    from fitting.intake import read_values

    runner = doctest.DocTestRunner()
    for obj in (read_table, read_values, Table.select, unit_of):
        tests = doctest.DocTestFinder().find(obj, globs=dict(vars(fitting.intake)))
        assert tests and tests[0].examples, obj.__qualname__
        for test in tests:
            runner.run(test)
    assert runner.summarize(verbose=False).failed == 0
