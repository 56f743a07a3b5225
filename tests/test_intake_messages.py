"""Regression tests of intake's messages: exact counts and sizes, honest causes, bounded echoes.

Each check feeds an input whose message used to mislead (a cut column count, "empty" for
a file of NUL bytes, equal rounded sizes on both sides of a limit, a 50 MB name echoed in
full) and asserts the sentence now says what is true. The expected numbers are the
inputs' own sizes and counts, computed here.
"""

from __future__ import annotations

import pytest

from fitting import MAX_COLUMNS, ColumnError, FileTooLargeError, IntakeError, read_table, read_values
from fitting.intake import ECHO_LIMIT


def _message(data: bytes, **kw) -> str:
    with pytest.raises(IntakeError) as info:
        read_table(data, name="wide.csv", **kw)
    return str(info.value)


def test_a_million_columns_are_counted_exactly():
    n = 1_000_000
    row = b",".join([b"1.5"] * n) + b"\n"
    msg = _message(row * 3)
    assert f"has {n:,} columns" in msg, msg
    assert f"{MAX_COLUMNS:,}" in msg


def test_twenty_two_million_columns_are_counted_exactly():
    n = 22_000_003
    row = b"7," * (n - 1) + b"7\n"
    msg = _message(row)
    assert f"has {n:,} columns" in msg, msg


def test_quoted_wide_row_is_counted_exactly():
    n = 300_000
    row = b",".join([b'"a,b"'] + [b"2"] * (n - 1)) + b"\n"
    msg = _message(row * 2)
    assert f"has {n:,} columns" in msg, msg


@pytest.mark.parametrize("data", [b",,,,\n,,,\n,,\n", b";;;\n;;\n", b"|||\n||\n", b", ,\n"])
def test_only_delimiters_is_not_called_one_column(data):
    for reader in (read_table, read_values):
        with pytest.raises(IntakeError) as info:
            reader(data, name="commas.csv")
        msg = str(info.value)
        assert "no comma" not in msg and "one column" not in msg, msg
        assert "only delimiters" in msg


@pytest.mark.parametrize("size", [1, 4096, 1 << 20])
def test_nul_bytes_only_are_not_called_empty(size, tmp_path):
    data = b"\x00" * size
    msg = _message(data)
    assert "empty" not in msg and "only NUL bytes" in msg, msg
    p = tmp_path / "zeros.csv"
    p.write_bytes(data)
    with pytest.raises(IntakeError, match="only NUL bytes"):
        read_table(p)


def test_nul_bytes_only_in_the_streaming_reader(tmp_path):
    from fitting import sweep_source

    p = tmp_path / "zeros.csv"
    p.write_bytes(b"\x00" * 70_000)
    with pytest.raises(IntakeError, match="only NUL bytes"):
        sweep_source(p)


def test_one_byte_over_the_limit_gives_exact_bytes(tmp_path):
    limit = 2 * 1024 * 1024
    data = b"x,y\n" + b"1,2\n" * ((limit - 4) // 4) + b"1,2\n"[: limit + 1 - 4 - 4 * ((limit - 4) // 4)]
    assert len(data) == limit + 1
    with pytest.raises(FileTooLargeError) as info:
        read_table(data, max_bytes=limit, name="big.csv")
    msg = str(info.value)
    assert "2.0 MiB" not in msg and "2 MiB" not in msg, msg
    assert f"{limit + 1:,} bytes" in msg and f"{limit:,} bytes" in msg
    assert info.value.size_bytes == limit + 1 and info.value.limit_bytes == limit
    p = tmp_path / "big.csv"
    p.write_bytes(data)
    with pytest.raises(FileTooLargeError, match=f"over the size limit of {limit:,} bytes"):
        read_table(p, max_bytes=limit)


def test_clearly_larger_file_keeps_rounded_sizes():
    with pytest.raises(FileTooLargeError) as info:
        read_table(b"x,y\n" + b"1,2\n" * 3000, max_bytes=10_000)
    msg = str(info.value)
    assert "11.7 KiB" in msg and "over the 9.8 KiB size limit" in msg


def test_a_50_mb_column_name_is_cut_in_the_message():
    t = read_table(b"x,y\n1,2\n2,3\n3,5\n")
    huge = "q" * 50_000_000
    with pytest.raises(ColumnError) as info:
        t.select(huge, "y")
    msg = str(info.value)
    assert msg.startswith("There is no column named 'q")
    assert "…" in msg and len(msg) < 400, len(msg)
    assert "q" * ECHO_LIMIT not in msg


def test_long_names_in_the_file_are_cut_when_listed():
    long_name = "w" * 100_000
    t = read_table(f"x,y,{long_name}\n1,2,a\n2,3,b\n3,5,c\n".encode())
    assert long_name in t.report.columns  # the name itself is kept whole
    with pytest.raises(ColumnError) as info:
        t.select("nope", "y")
    assert len(str(info.value)) < 500 and "…" in str(info.value)
    with pytest.raises(ColumnError) as info:
        t.select(long_name, "y")  # a text column cannot be x
    assert len(str(info.value)) < 500
    assert all(len(n) < 500 for n in t.report.notes)


def test_long_cell_text_is_cut_in_notes():
    cell = "z" * 200_000
    t = read_table(f"x,y\n1,2\n2,{cell}\n3,5\n4,6\n".encode())
    note = next(n for n in t.report.notes if "not a number" in n)
    assert len(note) < 500 and "…" in note
