"""Property tests of fitting.intake with hypothesis.

Only errors of the engine's own tree (DegreescopeError) may escape read_table and
Table.select, whatever the bytes; what is read obeys the row-accounting invariants; the
fast and general parse paths agree; and a clean table written in any supported dialect
reads back to exactly the values written.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, assume, event, given, settings
from hypothesis import strategies as st

from fitting import DEFAULT_MAX_BYTES, DegreescopeError, FitError, read_table

FUZZ = settings(
    max_examples=200,
    deadline=2000,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)


def _read(data: bytes, fast: bool):
    try:
        return read_table(data, max_bytes=DEFAULT_MAX_BYTES, name="fuzz.csv", fast_path=fast), None
    except DegreescopeError as exc:  # anything else fails the test
        return None, exc


def _check_invariants(table) -> None:
    rep = table.report
    frame = table.frame
    assert len(rep.numeric_columns) >= 2
    assert list(frame.columns) == rep.columns
    assert len(set(rep.columns)) == len(rep.columns)
    for c in rep.numeric_columns:
        assert frame[c].dtype == np.float64
    lines = table.line_numbers
    assert len(lines) == len(frame)
    assert np.all(np.diff(lines) > 0) and (len(lines) == 0 or lines[0] >= 1)
    assert len(frame) + sum(d.count for d in rep.dropped.values()) == rep.rows_read
    for info in rep.dropped.values():
        assert 1 <= len(info.first_lines) <= 5 and info.count >= len(info.first_lines)
        assert info.first_lines == sorted(info.first_lines)
    json.dumps(rep.to_dict(), allow_nan=False)
    assert rep.summary_lines()
    try:
        sel = table.select()
    except FitError:
        return
    assert sel.rows_used + sel.rows_dropped == rep.rows_read
    assert np.isfinite(sel.x).all() and np.isfinite(sel.y).all()
    assert np.unique(sel.x).size >= 2
    json.dumps(sel.to_dict(include_arrays=True), allow_nan=False)


def _check_both_paths(data: bytes) -> None:
    fast, fast_err = _read(data, True)
    general, general_err = _read(data, False)
    assert (fast is None) == (general is None)
    event("read" if fast is not None else f"refused: {str(fast_err).split(';')[0].split(' ', 1)[-1][:40]}")
    if fast is None:
        assert type(fast_err) is type(general_err)
        assert str(fast_err) == str(general_err)
        return
    pd.testing.assert_frame_equal(fast.frame, general.frame, check_exact=True)
    assert fast.report == general.report
    assert fast.line_numbers.tolist() == general.line_numbers.tolist()
    _check_invariants(fast)


# --------------------------------------------------------------------------- random bytes


@FUZZ
@given(st.binary(max_size=3000))
def test_random_bytes_raise_only_engine_errors(data):
    _check_both_paths(data)


@FUZZ
@given(st.sampled_from([b"\xef\xbb\xbf", b"\xff\xfe", b"\xfe\xff", b"PK\x03\x04", b""]), st.binary(max_size=1000))
def test_random_bytes_after_a_signature(prefix, data):
    _check_both_paths(prefix + data)


# --------------------------------------------------------------------------- CSV-like text

_TOKENS = [
    "",
    " ",
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
    "inf",
    "-inf",
    "Infinity",
    "+inf",
    "\u221e",
    "\u2212\u221e",
    "1e999",
    "\u22121.5",
    "+2",
    "1,250.0",
    "1.250,5",
    "1 250",
    "4,5e2",
    "1.2E-3",
    "3,41",
    ".5",
    "5.",
    '"3,41"',
    '"1,250.0"',
    '"',
    '""',
    '"a\nb"',
    "Mean",
    "Total",
    "Note: x",
    "abc",
    "°C",
    "µS/cm",
    "x (2)",
    "t [s]",
    "#DIV/0!",
    "0x1F",
    "1_000",
    "12..3",
    "\t",
    "+nan",
    "nan(1)",
    "1e",
    ".",
    "\u00a07",
    "\uff11",
]
_LINES = ["", "   ", "# comment", "// note", "; ini", "---", "|---|---|", "Instrument: X", "Date,2026-01-01"]


def _number_text():
    return st.one_of(
        st.floats(allow_nan=False, allow_infinity=False, width=64).map(repr),
        st.integers(-(10**9), 10**9).map(str),
        st.decimals(allow_nan=False, allow_infinity=False, places=3).map(str),
    )


@st.composite
def csv_like(draw):
    delim = draw(st.sampled_from([",", ";", "\t", "|"]))
    cell = st.one_of(
        _number_text(),
        st.sampled_from(_TOKENS),
        st.text(alphabet=st.characters(codec="utf-8", exclude_categories=["Cs"]), max_size=6),
    )
    row = st.lists(cell, min_size=0, max_size=6).map(delim.join)
    lines = draw(st.lists(st.one_of(row, row, row, st.sampled_from(_LINES)), min_size=0, max_size=40))
    end = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    text = end.join(lines) + draw(st.sampled_from(["", end]))
    enc = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "utf-16-le", "utf-16-be", "cp1252"]))
    return text.encode(enc, errors="replace")


@FUZZ
@given(csv_like())
def test_csv_like_text_raises_only_engine_errors(data):
    _check_both_paths(data)


@st.composite
def numeric_table(draw):
    """A table of numbers and missing cells in a mostly clean layout."""
    delim = draw(st.sampled_from([",", ";", "\t", "|"]))
    ncol = draw(st.integers(2, 4))
    nrow = draw(st.integers(1, 60))
    cell = st.one_of(_number_text(), _number_text(), _number_text(), st.sampled_from(["", "NA", "nan", "-", "inf"]))
    body = [delim.join(draw(st.lists(cell, min_size=ncol, max_size=ncol))) for _ in range(nrow)]
    if draw(st.booleans()):
        body.insert(0, delim.join(f"c{j}" for j in range(ncol)))
    for _ in range(draw(st.integers(0, 3))):
        body.insert(draw(st.integers(0, len(body))), draw(st.sampled_from(_LINES)))
    return ("\n".join(body) + "\n").encode()


@FUZZ
@given(numeric_table())
def test_mostly_clean_tables_keep_the_invariants(data):
    _check_both_paths(data)


# --------------------------------------------------------------------------- exact round trip


@st.composite
def written_table(draw):
    delim = draw(st.sampled_from([",", ";", "\t", "|"]))
    decimal = draw(st.sampled_from([".", ","])) if delim != "," else "."
    ncol = draw(st.integers(2, 4))
    nrow = draw(st.integers(3, 80))
    finite = st.floats(min_value=-1e12, max_value=1e12, allow_nan=False, allow_subnormal=False)
    # A share of values with a fraction, so that a decimal comma has something to show.
    values = draw(
        st.lists(
            st.lists(
                st.one_of(finite, finite.map(lambda v: v + 0.5 if abs(v) < 1e9 else v)), min_size=ncol, max_size=ncol
            ),
            min_size=nrow,
            max_size=nrow,
        )
    )
    header = draw(st.booleans())
    names = [f"q{j} [mV]" if j % 2 else f"q{j}" for j in range(ncol)]
    preamble = draw(st.lists(st.sampled_from(["# invented test data", "// logger", ""]), max_size=3))
    end = draw(st.sampled_from(["\n", "\r\n"]))

    def fmt(v: float) -> str:
        s = repr(float(v))
        return s.replace(".", ",") if decimal == "," else s

    out = list(preamble)
    if header:
        out.append(delim.join(names))
    out += [delim.join(fmt(v) for v in r) for r in values]
    enc = draw(st.sampled_from(["utf-8", "utf-16", "cp1252"]))
    return (end.join(out) + end).encode(enc), values, header, names, decimal


@FUZZ
@given(written_table())
def test_clean_tables_read_back_exactly(case):
    data, values, header, names, decimal = case
    expected = np.array(values, dtype=np.float64)
    written = [repr(float(v)) for r in values for v in r]
    # "1.250" / "1,250" alone cannot tell a decimal mark from digit grouping (common
    # practice, no source); such files are inherently ambiguous and left out here.
    assume(not all(re.fullmatch(r"-?[1-9]\d{0,2}\.\d{3}", s) or "." not in s for s in written))
    frac = [s for s in written if "." in s]
    for fast in (True, False):
        table, err = _read(data, fast)
        assert err is None, err
        rep = table.report
        assert rep.rows_read == len(values)
        assert rep.columns == (names if header else [f"column {j + 1}" for j in range(len(names))])
        if frac:
            assert rep.decimal == decimal
        got = table.frame.to_numpy(dtype=np.float64)
        assert np.array_equal(got, expected)
