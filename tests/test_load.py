"""Bounded load on the real dashboard: 50 concurrent sessions on 127.0.0.1, each with its own data.

The harness is benchmarks/bench_load.py (run it for the full version). Each session
uploads its own invented dataset (y = a_k + b_k x, a distinct a_k per session), asks
for the split and charts, then changes the degree three times. Reference for the
numbers each session must get back: numpy.polynomial.Polynomial.fit on that session's
own rows. The run stops itself after its time limit; the server is stopped at the end.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parent.parent
_spec = importlib.util.spec_from_file_location("bench_load", ROOT / "benchmarks" / "bench_load.py")
bench = importlib.util.module_from_spec(_spec)
sys.modules.setdefault("bench_load", bench)  # dataclasses look their module up by name
_spec.loader.exec_module(bench)


def test_session_data_are_distinct_and_parse_back():
    from fitting import read_table

    for k in (0, 1, 49):
        t = read_table(bench.session_csv(k))
        x, y = bench.session_data(k)
        sel = t.select("x", "y")
        np.testing.assert_array_equal(sel.x, x)
        np.testing.assert_array_equal(sel.y, y)
    assert len({float(bench.session_data(k)[1][0]) for k in range(50)}) == 50


def test_crosstalk_detector_flags_foreign_points():
    """The check must be able to fail: session 3's chart showing session 4's points is flagged."""
    result = bench.Result()
    s = bench.Session.__new__(bench.Session)
    s.k, s.result = 3, result
    _, y_own = bench.session_data(3)
    _, y_other = bench.session_data(4)
    s._check_points({"data": [{"y": y_own.tolist()}]}, y_own)
    assert result.crosstalk == []
    s._check_points({"data": [{"y": y_other.tolist()}]}, y_own)
    assert len(result.crosstalk) == 1
    x3, y3 = bench.session_data(3)
    for d in (1, 2, 3):
        own = np.polynomial.polynomial.polyfit(x3, y3, d)  # a second reference solver
        other = np.polynomial.polynomial.polyfit(*bench.session_data(4), d)
        assert bench.coefficients_match(list(own), x3, y3, d)
        assert not bench.coefficients_match(list(other), x3, y3, d)
        assert not bench.coefficients_match(list(own[:-1]), x3, y3, d)


@pytest.mark.slow
def test_fifty_concurrent_sessions_no_errors_no_crosstalk(capsys):
    out = bench.run_load(sessions=50, degrees=(1, 2, 3), threads=8, timeout=150.0)
    with capsys.disabled():
        print(
            f"\n[load] {out['sessions']} sessions, {out['requests']} requests in {out['wall_seconds']:.1f} s: "
            f"p50 {out['p50_ms']:.0f} ms, p95 {out['p95_ms']:.0f} ms, status {out['status']}"
        )
    assert out["unfinished_sessions"] == 0
    assert out["server_errors_5xx"] == 0, out["status"]
    assert out["errors"] == [], out["errors"][:5]
    assert out["crosstalk"] == [], out["crosstalk"][:5]
    # page, layout, dependencies, upload, split, then (degree + model) x 3 per session
    assert out["requests"] == 50 * (5 + 2 * 3)
    assert out["refused_by_guard"] == {"host": 0, "token": 0}
