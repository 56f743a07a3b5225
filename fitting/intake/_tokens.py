"""Stage 3 helpers: splitting lines into fields, and cells into numbers (rules 9-10), with Arrow kernels."""

from __future__ import annotations

import csv
import io
import re

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from ._patterns import _FIRST_LINES, _MISSING_ARROW, _NAN_FORMS
from ._wording import lines_phrase, plural


def np_bool(arr) -> np.ndarray:
    return np.asarray(pc.fill_null(arr, False).to_numpy(zero_copy_only=False), dtype=bool)


def match_where(arr, where: np.ndarray, pattern: str) -> np.ndarray:
    """The regex match of ``arr`` against ``pattern``, evaluated only where ``where`` is true."""
    out = np.zeros(len(arr), dtype=bool)
    idx = np.nonzero(where)[0]
    if idx.size:
        out[idx] = np_bool(pc.match_substring_regex(arr.take(pa.array(idx)), pattern))
    return out


def tokens_plain(kept, kept_numbers: np.ndarray, d: str, k: int):
    """Split lines without quotes on the delimiter, vectorised."""
    split = pc.split_pattern(kept, d)
    counts = pc.list_value_length(split).to_numpy(zero_copy_only=False).astype(np.int64)
    if counts.size and counts.min() < k:
        pad = pa.scalar(d * k, kept.type)
        split = pc.split_pattern(pc.binary_join_element_wise(kept, pad, pa.scalar("", kept.type)), d)
    cols = [pc.list_element(split, j) for j in range(k)] if counts.size else [pa.array([], pa.large_string())] * k
    extra = np.zeros(len(counts), dtype=bool)
    long_idx = np.nonzero(counts > k)[0]
    if long_idx.size:
        texts = kept.take(pa.array(long_idx)).to_pylist()
        extra[long_idx] = [any(f.strip() for f in t.split(d)[k:]) for t in texts]
    return cols, counts, kept_numbers, extra


class QuoteError(Exception):
    """A quoted field that never closes (or outgrows the csv module's field limit)."""

    def __init__(self, line: int):
        super().__init__(line)
        self.line = line


def tokens_quoted(kept, kept_numbers: np.ndarray, d: str, k: int):
    """Tokenise with Python's csv module (C code) when the text holds quotes."""
    items = kept.to_pylist()
    opts = dict(delimiter=d, quotechar='"', doublequote=True, skipinitialspace=True, strict=False)
    multi = None
    try:
        records = list(csv.reader(items, **opts))
    except csv.Error:
        records = []  # find the line in the tracking pass below
    if len(records) == len(items):
        numbers = kept_numbers
    else:
        reader = csv.reader(io.StringIO("\n".join(items)), **opts)
        records, starts = [], []
        prev = 0
        n_multi, first_multi = 0, 0
        while True:
            try:
                rec = next(reader)
            except StopIteration:
                break
            except csv.Error:
                raise QuoteError(int(kept_numbers[prev])) from None
            records.append(rec)
            starts.append(prev)
            span = reader.line_num - prev
            if span > 1:
                n_multi += 1
                first_multi = first_multi or int(kept_numbers[prev])
            prev = reader.line_num
        numbers = kept_numbers[np.asarray(starts, dtype=np.int64)] if starts else kept_numbers[:0]
        multi = (n_multi, first_multi) if n_multi else None
    counts = np.fromiter((len(r) for r in records), dtype=np.int64, count=len(records))
    extra = np.zeros(len(records), dtype=bool)
    for i in np.nonzero(counts != k)[0]:
        rec = records[i]
        if len(rec) > k:
            extra[i] = any(f.strip() for f in rec[k:])
        records[i] = (rec + [""] * k)[:k]
    if records:
        cols = [pa.array(list(c), pa.large_string()) for c in zip(*records, strict=False)]
    else:
        cols = [pa.array([], pa.large_string()) for _ in range(k)]
    return cols, counts, numbers, extra, multi


def _number_patterns(decimal: str):
    dm = re.escape(decimal)
    plain = f"^[+-]?(?:\\d+(?:{dm}\\d*)?|{dm}\\d+)(?:[eE][+-]?\\d+)?$"
    inf = "(?i)^[+-]?inf(?:inity)?$"
    marks = ["." if decimal == "," else ",", " ", "\u00a0", "\u202f"]
    grouped = {g: f"^[+-]?\\d{{1,3}}(?:{re.escape(g) if g in '.,' else g}\\d{{3}})+(?:{dm}\\d*)?$" for g in marks}
    return plain, inf, grouped


def parse_numbers(arr, decimal: str):
    """Parse a column of trimmed strings: (float64 values, is_number, is_missing, grouping masks).

    The plain pattern runs on every cell; markers, infinities and digit grouping are
    checked only on the cells it rejects.
    """
    plain_re, inf_re, grouped_re = _number_patterns(decimal)
    n = len(arr)
    s = arr
    if n and pc.any(pc.match_substring(s, "\u2212")).as_py():
        s = pc.replace_substring(s, "\u2212", "-")
    if n and pc.any(pc.match_substring(s, "\u221e")).as_py():
        s = pc.replace_substring(s, "\u221e", "inf")
    plain = np_bool(pc.match_substring_regex(s, plain_re))
    valid = plain.copy()
    missing = np.zeros(n, dtype=bool)
    groups: dict[str, np.ndarray] = {}
    out = np.full(n, np.nan, dtype=np.float64)
    rest = np.nonzero(~plain)[0]
    rest_canon = None
    rest_valid = np.zeros(rest.size, dtype=bool)
    if rest.size:
        take = pa.array(rest)
        sub, sub_raw = s.take(take), arr.take(take)
        rest_valid = np_bool(pc.match_substring_regex(sub, inf_re))
        rest_canon = sub
        for g, pattern in grouped_re.items():
            if not pc.any(pc.match_substring(sub, g)).as_py():
                continue
            m = np_bool(pc.match_substring_regex(sub, pattern)) & ~rest_valid
            if m.any():
                rest_canon = pc.if_else(pa.array(m), pc.replace_substring(rest_canon, g, ""), rest_canon)
                key = " " if g in "\u00a0\u202f" else g
                full = groups.setdefault(key, np.zeros(n, dtype=bool))
                full[rest[m]] = True
                rest_valid |= m
        miss = np_bool(pc.is_in(pc.utf8_lower(sub_raw), value_set=_MISSING_ARROW))
        miss |= np_bool(pc.match_substring_regex(sub_raw, _NAN_FORMS))
        missing[rest] = miss & ~rest_valid
        valid[rest] = rest_valid

    def to_float(strings) -> np.ndarray:
        if decimal == ",":
            strings = pc.replace_substring(strings, ",", ".")
        return np.asarray(pc.cast(strings, pa.float64()).to_numpy(zero_copy_only=False), dtype=np.float64)

    if plain.all():
        out = to_float(s) if n else out
    elif plain.any():
        out[plain] = to_float(s.filter(pa.array(plain)))
    if rest_valid.any():
        out[rest[rest_valid]] = to_float(rest_canon.filter(pa.array(rest_valid)))
    return out, valid, missing, groups


def inf_notes(values: np.ndarray, lines: np.ndarray) -> list[str]:
    inf = np.isinf(values)
    n = int(inf.sum())
    if not n:
        return []
    return [
        f"{plural(n, 'infinite value')} ({lines_phrase(lines[inf][:_FIRST_LINES], n)}); "
        f"rows with an infinite x or y are left out of a fit."
    ]
