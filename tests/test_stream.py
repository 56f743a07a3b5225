"""Checks of the streaming degree sweep over CSV and Parquet sources (fitting.sweep_source).

Outside references named beside each check:
* numpy.linalg.lstsq on a Chebyshev design (numpy.polynomial.chebyshev.chebvander)
  refits every training set directly, row by row, for the train and test RMSE.
* The in-memory sweep ``fitting.sweep_degrees`` with predefined folds (itself
  checked against scikit-learn's PredefinedSplit) must agree to 1e-9 when it is
  given the same fold labels.
* The splitmix64 generator: its published reference implementation
  (S. Vigna, splitmix64.c) gives 0xE220A8397B1DCDAF as the first output from
  state 0 (value quoted from memory; a scalar re-implementation of that
  reference code checks the vectorised one as well).
* scipy.stats.chisquare for the balance of the hashed folds.
All data are invented in the tests.
"""

from __future__ import annotations

import math

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from numpy.polynomial import chebyshev as C
from scipy import stats

from fitting import ColumnError, FitError, IntakeError, fold_labels, holdout_mask, sweep_degrees, sweep_source

RTOL = 1e-9
FIELDS = (
    "train_rmse",
    "test_rmse",
    "test_rmse_se",
    "train_rmse_folds",
    "test_rmse_folds",
    "train_r2",
    "test_r2",
    "aic",
    "bic",
)


def invented(n: int, seed: int = 7):
    """Invented curve: a smooth drift with noise, x uneven over [-2, 5]."""
    rng = np.random.default_rng(seed)
    x = rng.uniform(-2.0, 5.0, n)
    y = 3.0 + 0.8 * x - 0.45 * x**2 + 0.05 * x**3 + rng.normal(0.0, 0.3, n)
    return x, y


def write_csv(path, x, y, *, comments=True, header="temperature (°C),strain (µm/m)", extra=None):
    with open(path, "w", encoding="utf-8") as fh:
        if comments:
            fh.write("# Invented strain-gauge log for tests, not a real measurement.\n")
            fh.write('# Units: temperature in °C, strain in µm/m, "quoted", with commas\n')
            fh.write("\n")
        fh.write(header + "\n")
        for a, b in zip(x, y, strict=False):
            fh.write(f"{float(a)!r},{float(b)!r}\n")
        if extra:
            fh.write(extra)


def assert_same_sweep(a, b, rtol=RTOL):
    assert list(a.degrees) == list(b.degrees)
    for name in FIELDS:
        va, vb = np.asarray(getattr(a, name), float), np.asarray(getattr(b, name), float)
        assert va.shape == vb.shape, name
        assert np.array_equal(np.isnan(va), np.isnan(vb)), name
        ok = ~np.isnan(va)
        # R² is 0 by construction at degree 0 in training: compare it on an absolute scale too
        atol = 1e-12 if name.endswith("r2") else 0.0
        np.testing.assert_allclose(va[ok], vb[ok], rtol=rtol, atol=atol, err_msg=name)
    assert a.recommended_degree == b.recommended_degree
    assert a.rows_used == b.rows_used
    assert a.domain == b.domain
    assert (a.offset, a.scale) == (b.offset, b.scale)


# ----------------------------------------------------------------------------
# fold labels


def splitmix64_reference(state: int, count: int) -> list[int]:
    """Scalar transcription of the splitmix64 reference generator."""
    mask = (1 << 64) - 1
    out = []
    for _ in range(count):
        state = (state + 0x9E3779B97F4A7C15) & mask
        z = state
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & mask
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & mask
        out.append(z ^ (z >> 31))
    return out


def test_hash_is_splitmix64():
    # The 64-bit hash is read through the public functions: fold_labels with k = 2**63
    # gives its low 63 bits, and holdout_mask at 0.5 is true exactly when its top bit is 0.
    def row_hash(idx, seed):
        low = fold_labels(idx, 2**63, seed).astype(np.uint64)
        top = (~holdout_mask(idx, 0.5, seed)).astype(np.uint64) << np.uint64(63)
        return low | top

    # first output from state 0 of the reference generator (quoted from memory, see module docstring)
    assert int(row_hash(np.array([0]), 0)[0]) == 0xE220A8397B1DCDAF
    for seed in (0, 1, 12345, 2**63 + 5):
        ref = splitmix64_reference(seed, 50)
        got = row_hash(np.arange(50), seed)
        assert [int(v) for v in got] == ref


def test_fold_labels_deterministic_and_balanced():
    idx = np.arange(200_000)
    a = fold_labels(idx, 10, 3)
    assert a.dtype == np.int64 and a.min() == 0 and a.max() == 9
    assert np.array_equal(a, fold_labels(idx, 10, 3))  # same seed, same split
    assert np.array_equal(a[1000:1100], fold_labels(idx[1000:1100], 10, 3))  # depends on the index only
    b = fold_labels(idx, 10, 4)
    assert (a != b).mean() > 0.85  # another seed reshuffles (0.9 expected)
    counts = np.bincount(a, minlength=10)
    # balance: uniform counts by a chi-square test (scipy.stats.chisquare); deterministic, so not flaky
    assert stats.chisquare(counts).pvalue > 1e-3
    assert np.all(np.abs(counts - 20_000) < 6 * math.sqrt(20_000))
    m = holdout_mask(idx, 0.25, 3)
    assert abs(m.mean() - 0.25) < 0.005
    assert np.array_equal(m, holdout_mask(idx, 0.25, 3))


def test_fold_labels_rejects_bad_input():
    with pytest.raises(FitError):
        fold_labels(np.arange(5), 1, 0)
    with pytest.raises(FitError):
        fold_labels(np.array([0.5, 1.5]), 3, 0)
    with pytest.raises(FitError):
        fold_labels(np.array([-1, 2]), 3, 0)


# ----------------------------------------------------------------------------
# equality with the in-memory sweep and with direct refits


def test_csv_equals_in_memory_sweep_with_same_labels(tmp_path):
    x, y = invented(3000)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    res, info = sweep_source(path, degrees=range(0, 11), folds=10, seed=11, chunk_rows=700)
    ref = sweep_degrees(x, y, degrees=range(0, 11), folds=fold_labels(np.arange(x.size), 10, 11))
    assert_same_sweep(res, ref)
    assert info["rows_used"] == 3000 and info["rows_dropped"] == 0
    assert info["x"] == "temperature (°C)" and info["y"] == "strain (µm/m)"
    assert info["engine"] == "numpy" and info["chunks"] >= 5 and info["seconds"] > 0
    assert "row hash" in res.scheme


def test_fold_errors_match_direct_refits(tmp_path):
    """Every (degree, fold) train/test RMSE against numpy.linalg.lstsq on that fold's rows."""
    x, y = invented(800, seed=3)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    res, _ = sweep_source(path, degrees=[0, 2, 5, 9], folds=5, seed=2, chunk_rows=97)
    lab = fold_labels(np.arange(x.size), 5, 2)
    offset, scale = 0.5 * (x.min() + x.max()), 0.5 * (x.max() - x.min())
    t = (x - offset) / scale
    for i, d in enumerate(res.degrees):
        for j in range(5):
            tr, te = lab != j, lab == j
            coef = np.linalg.lstsq(C.chebvander(t[tr], d), y[tr], rcond=None)[0]
            tr_rmse = math.sqrt(np.mean((y[tr] - C.chebval(t[tr], coef)) ** 2))
            te_rmse = math.sqrt(np.mean((y[te] - C.chebval(t[te], coef)) ** 2))
            assert res.train_rmse_folds[i, j] == pytest.approx(tr_rmse, rel=1e-9)
            assert res.test_rmse_folds[i, j] == pytest.approx(te_rmse, rel=1e-9)


def test_holdout_matches_direct_refit(tmp_path):
    x, y = invented(1500, seed=5)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    res, _ = sweep_source(path, degrees=range(0, 7), holdout=0.3, seed=9, chunk_rows=256)
    test = holdout_mask(np.arange(x.size), 0.3, 9)
    assert res.n_splits == 1 and res.recommendation_rule == "minimum-test-error"
    assert res.display_n == int((~test).sum())
    assert res.display_domain == (float(x[~test].min()), float(x[~test].max()))
    for i, d in enumerate(res.degrees):
        # reference: numpy.polynomial.chebyshev.chebfit on the training rows (mapped x)
        t = (x - res.offset) / res.scale
        coef = C.chebfit(t[~test], y[~test], d)
        te = math.sqrt(np.mean((y[test] - C.chebval(t[test], coef)) ** 2))
        assert res.test_rmse[i] == pytest.approx(te, rel=1e-9)
        np.testing.assert_allclose(res.display_coefficients[int(d)], coef, rtol=1e-8, atol=1e-10)


def test_chunk_size_does_not_change_results(tmp_path):
    x, y = invented(400, seed=8)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    one, info1 = sweep_source(path, degrees=range(0, 9), folds=4, seed=1, chunk_rows=1)
    big, info2 = sweep_source(path, degrees=range(0, 9), folds=4, seed=1, chunk_rows=1_000_000)
    assert info1["chunks"] == 400 and info2["chunks"] == 1
    assert_same_sweep(one, big)


def test_degree_cap_by_distinct_x_matches_in_memory(tmp_path):
    rng = np.random.default_rng(4)
    x = rng.choice([0.0, 1.0, 2.0, 3.0, 4.0, 5.0], size=300)
    y = np.sin(x) + rng.normal(0, 0.05, x.size)
    path = tmp_path / "steps.csv"
    write_csv(path, x, y)
    res, _ = sweep_source(path, degrees=range(0, 13), folds=5, seed=0, chunk_rows=50)
    ref = sweep_degrees(x, y, degrees=range(0, 13), folds=fold_labels(np.arange(x.size), 5, 0))
    assert list(res.degrees) == list(range(0, 6))
    assert_same_sweep(res, ref)
    assert res.warnings == ref.warnings


# ----------------------------------------------------------------------------
# reading: CSV layout, Parquet file / folder / glob, dropped rows


def test_csv_comment_lines_header_units_and_bom(tmp_path):
    x, y = invented(500, seed=12)
    plain = tmp_path / "plain.csv"
    write_csv(plain, x, y, comments=False, header="x,y")
    fancy = tmp_path / "fancy.csv"
    write_csv(fancy, x, y)
    raw = fancy.read_bytes()
    fancy.write_bytes(b"\xef\xbb\xbf" + raw)  # UTF-8 byte order mark
    a, ia = sweep_source(plain, folds=5)
    b, ib = sweep_source(fancy, folds=5)
    assert_same_sweep(a, b, rtol=0)
    assert (ia["x"], ia["y"]) == ("x", "y")
    assert (ib["x"], ib["y"]) == ("temperature (°C)", "strain (µm/m)")


def test_first_two_numeric_columns_and_named_columns(tmp_path):
    x, y = invented(300, seed=13)
    path = tmp_path / "three.csv"
    with open(path, "w") as fh:
        fh.write("# invented\nsite,depth (m),load (kN),temp (°C)\n")
        for a, b in zip(x, y, strict=False):
            fh.write(f"north,{float(a)!r},{float(b)!r},20.5\n")
    _, info = sweep_source(path, folds=3)
    assert (info["x"], info["y"]) == ("depth (m)", "load (kN)")
    res, info = sweep_source(path, x="depth (m)", y="temp (°C)", degrees=[0, 1], folds=3)
    assert info["y"] == "temp (°C)"
    assert np.allclose(res.test_rmse, 0.0, atol=1e-12)


def test_dropped_rows_are_counted_and_keep_their_index(tmp_path):
    x, y = invented(600, seed=14)
    path = tmp_path / "gaps.csv"
    lines = [f"{float(a)!r},{float(b)!r}" for a, b in zip(x, y, strict=False)]
    bad = {5: "abc,1.0", 17: ",2.0", 30: "3.0,", 44: "inf,1.0", 51: "2.0,nan", 77: "1.0,-inf", 90: "NA,4"}
    for i, text in bad.items():
        lines[i] = text
    lines.insert(120, "1.0,2.0,3.0")  # wrong number of fields: skipped by the parser, no row index
    with open(path, "w") as fh:
        fh.write("# invented, with gaps\nx (s),y (m)\n" + "\n".join(lines) + "\n")
    res, info = sweep_source(path, folds=5, seed=6, chunk_rows=64)
    assert info["rows_dropped"] == len(bad) + 1
    assert info["rows_used"] == 600 - len(bad)
    keep = np.ones(600, bool)
    keep[list(bad)] = False
    ref = sweep_degrees(x[keep], y[keep], folds=fold_labels(np.arange(600), 5, 6)[keep])
    assert_same_sweep(res, ref)


def write_parquet_parts(folder, x, y, parts=3, row_group_size=137):
    folder.mkdir(parents=True, exist_ok=True)
    cuts = np.linspace(0, x.size, parts + 1).astype(int)
    for i, (a, b) in enumerate(zip(cuts[:-1], cuts[1:], strict=False)):
        table = pa.table({"speed (km/h)": x[a:b], "power (kW)": y[a:b], "note": ["invented"] * (b - a)})
        pq.write_table(table, folder / f"part-{i:03d}.parquet", row_group_size=row_group_size)


def test_parquet_file_folder_and_glob_agree_with_csv(tmp_path):
    x, y = invented(2000, seed=15)
    csv = tmp_path / "log.csv"
    write_csv(csv, x, y)
    one = tmp_path / "one.parquet"
    pq.write_table(pa.table({"speed (km/h)": x, "power (kW)": y}), one, row_group_size=300)
    folder = tmp_path / "parts"
    write_parquet_parts(folder, x, y)
    ref, _ = sweep_source(csv, folds=6, seed=2)
    for source in (one, folder, str(folder / "part-*.parquet")):
        res, info = sweep_source(source, folds=6, seed=2, chunk_rows=250)
        assert_same_sweep(res, ref)
        assert info["format"] == "parquet" and info["passes"] == 1  # row-group statistics gave the range
    _, info = sweep_source(folder, folds=6)
    assert info["files"] == 3


def test_parquet_statistics_wider_than_used_rows(tmp_path):
    """The row with the largest x has no y: the map must come from the rows used."""
    x, y = invented(500, seed=16)
    i = int(np.argmax(x))
    y = y.copy()
    y[i] = np.nan
    path = tmp_path / "gap.parquet"
    pq.write_table(pa.table({"x": x, "y": pa.array(y, from_pandas=True)}), path, row_group_size=100)
    res, info = sweep_source(path, folds=5, seed=1)
    keep = np.isfinite(y)
    ref = sweep_degrees(x[keep], y[keep], folds=fold_labels(np.arange(500), 5, 1)[keep])
    assert info["rows_dropped"] == 1 and info["passes"] == 2
    assert_same_sweep(res, ref)


def test_progress_callback(tmp_path):
    x, y = invented(1000, seed=17)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    calls = []
    sweep_source(path, folds=5, chunk_rows=100, progress=lambda done, total: calls.append((done, total)))
    scan = [c for c in calls if c[1] is None]
    fit = [c for c in calls if c[1] is not None]
    assert scan and scan[-1][0] == 1000
    assert len(fit) == 10 and fit[-1] == (1000, 1000)
    assert [d for d, _ in fit] == sorted(d for d, _ in fit)
    calls.clear()
    folder = tmp_path / "parts"
    write_parquet_parts(folder, x, y)
    sweep_source(folder, folds=5, chunk_rows=100, progress=lambda d, t: calls.append((d, t)))
    assert all(t == 1000 for _, t in calls) and calls[-1] == (1000, 1000)  # total known from the metadata


# ----------------------------------------------------------------------------
# errors: one sentence each, of the documented classes


def one_sentence(exc):
    msg = str(exc.value)
    assert "\n" not in msg and msg.endswith(".") and msg == msg.strip()


def test_errors(tmp_path):
    x, y = invented(50, seed=18)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    cases = [
        (IntakeError, dict(source=tmp_path / "missing.csv")),
        (IntakeError, dict(source=str(tmp_path / "nothing-*.parquet"))),
        (IntakeError, dict(source=tmp_path)),  # a folder without Parquet files
        (ColumnError, dict(source=path, x="pressure")),
        (ColumnError, dict(source=path, x="temperature (°C)", y="temperature (°C)")),
        (FitError, dict(source=path, folds=1)),
        (FitError, dict(source=path, folds=100)),
        (FitError, dict(source=path, holdout=1.5)),
        (FitError, dict(source=path, engine="spark")),
        (FitError, dict(source=path, chunk_rows=0)),
        (FitError, dict(source=path, degrees=[-1])),
        (FitError, dict(source=path, folds=np.zeros(50))),
    ]
    for cls, kwargs in cases:
        with pytest.raises(cls) as exc:
            sweep_source(**kwargs)
        one_sentence(exc)
    single = tmp_path / "single.csv"
    single.write_text("# invented\nname,value\na,1\nb,2\n")
    with pytest.raises(ColumnError) as exc:
        sweep_source(single)
    one_sentence(exc)
    empty = tmp_path / "empty.csv"
    empty.write_text("# only a comment\n")
    with pytest.raises(IntakeError) as exc:
        sweep_source(empty)
    one_sentence(exc)
    nan = tmp_path / "nan.csv"
    nan.write_text("x,y\n" + "nan,1\n" * 20)
    with pytest.raises(ColumnError) as exc:
        sweep_source(nan, x="x", y="y")
    one_sentence(exc)
    flat = tmp_path / "flat.csv"
    flat.write_text("x,y\n" + "".join(f"2.0,{i}\n" for i in range(20)))
    with pytest.raises(FitError) as exc:
        sweep_source(flat, folds=3)
    one_sentence(exc)


def test_dask_engine_without_dask_says_how_to_install(tmp_path, monkeypatch):
    import sys

    x, y = invented(50, seed=19)
    path = tmp_path / "log.csv"
    write_csv(path, x, y)
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    with pytest.raises(FitError) as exc:
        sweep_source(path, engine="dask")
    assert 'pip install ".[dask]"' in str(exc.value)
    one_sentence(exc)


# ----------------------------------------------------------------------------
# extreme magnitudes


@pytest.mark.parametrize("factor", [1e200, 1e-200])
def test_y_near_1e200_streams_as_in_ordinary_units(tmp_path, factor):
    # Reference: the same streamed sweep in ordinary units, every error multiplied by the factor (R² and
    # the verdict unchanged); and the in-memory sweep, which scales y by a power of two the same way.
    # Without the scaling, squares of y near 1e200 overflow (and near 1e-200 underflow) in double precision.
    x, y = invented(1200, seed=20)
    plain, big = tmp_path / "plain.csv", tmp_path / "big.csv"
    write_csv(plain, x, y)
    write_csv(big, x, y * factor)
    ref, _ = sweep_source(plain, degrees=range(0, 9), folds=6, seed=4, chunk_rows=300)
    res, info = sweep_source(big, degrees=range(0, 9), folds=6, seed=4, chunk_rows=300)
    assert info["passes"] == 2  # the scan found the y range: no extra pass
    for name in ("train_rmse", "test_rmse", "test_rmse_se", "train_rmse_folds", "test_rmse_folds"):
        np.testing.assert_allclose(getattr(res, name), getattr(ref, name) * factor, rtol=1e-12, err_msg=name)
    for name in ("train_r2", "test_r2"):
        np.testing.assert_allclose(getattr(res, name), getattr(ref, name), rtol=1e-12, atol=1e-12, err_msg=name)
    # AIC and BIC shift by the same constant n ln(factor²) at every degree
    np.testing.assert_allclose(np.diff(res.aic), np.diff(ref.aic), rtol=1e-9, atol=1e-6)
    assert res.recommended_degree == ref.recommended_degree and res.overfitting_from == ref.overfitting_from
    np.testing.assert_allclose(res.curve(3, x[:50]), ref.curve(3, x[:50]) * factor, rtol=1e-11)
    mem = sweep_degrees(x, y * factor, degrees=range(0, 9), folds=fold_labels(np.arange(x.size), 6, 4))
    assert_same_sweep(res, mem)


def test_extreme_y_in_parquet_takes_a_second_pass(tmp_path):
    # Parquet statistics give the x range only: a y near 1e200 is found in the first pass and redone scaled.
    x, y = invented(900, seed=23)
    path = tmp_path / "big.parquet"
    pq.write_table(pa.table({"x": x, "y": y * 1e200}), path, row_group_size=300)
    ref, info_big = sweep_source(path, degrees=range(0, 7), folds=5, seed=1)
    assert info_big["passes"] == 2
    plain = tmp_path / "plain.parquet"
    pq.write_table(pa.table({"x": x, "y": y}), plain, row_group_size=300)
    base, info = sweep_source(plain, degrees=range(0, 7), folds=5, seed=1)
    np.testing.assert_allclose(ref.test_rmse_folds, base.test_rmse_folds * 1e200, rtol=1e-12)
    assert ref.recommended_degree == base.recommended_degree and info["passes"] == 1
