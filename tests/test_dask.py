"""Checks of the dask.distributed engine of the streaming sweep (fitting._dask).

The reference is the numpy streaming engine (itself checked in test_stream.py
against numpy.linalg.lstsq refits and the in-memory sweep): for the same source
and seed every per-fold error must agree to 1e-9. The local cluster must listen
on loopback only and be gone when the sweep returns. All data are invented.

dask is an optional extra (``pip install ".[dask]"``). Without it these tests
are skipped on a workstation; under CI=true a missing dask is a failure.
"""

from __future__ import annotations

import importlib.util
import os

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from fitting import FitError

HAVE_DASK = importlib.util.find_spec("dask") is not None and importlib.util.find_spec("distributed") is not None
if not HAVE_DASK:
    if os.environ.get("CI") == "true":
        raise ImportError('CI=true but dask is not installed; install it with pip install ".[dask]".')
    pytest.skip('dask is not installed (pip install ".[dask]")', allow_module_level=True)

import psutil  # noqa: E402  (installed with distributed)

import fitting._dask as dask_engine  # noqa: E402
from fitting import sweep_source  # noqa: E402

FIELDS = ("train_rmse_folds", "test_rmse_folds", "train_r2", "test_r2", "aic", "bic", "condition_numbers")


def invented(n, seed):
    rng = np.random.default_rng(seed)
    x = np.sort(rng.uniform(0.0, 40.0, n))  # invented: a drifting gauge over 40 h
    y = 12.0 + 0.3 * x - 0.004 * x**2 + rng.normal(0.0, 0.2, n)
    return x, y


def assert_same(a, b):
    assert list(a.degrees) == list(b.degrees)
    for name in FIELDS:
        va, vb = np.asarray(getattr(a, name), float), np.asarray(getattr(b, name), float)
        atol = 1e-12 if name.endswith("r2") else 0.0
        np.testing.assert_allclose(va, vb, rtol=1e-9, atol=atol, err_msg=name)
    assert a.recommended_degree == b.recommended_degree
    assert (a.rows_used, a.domain, a.offset, a.scale) == (b.rows_used, b.domain, b.offset, b.scale)


def listening_sockets():
    return [c for c in psutil.Process().net_connections(kind="inet") if c.status == psutil.CONN_LISTEN]


@pytest.fixture
def parts(tmp_path):
    """Three invented Parquet files of several row groups each, one with a gap."""
    x, y = invented(3000, seed=21)
    y[1234] = np.nan
    folder = tmp_path / "parts"
    folder.mkdir()
    for i, (a, b) in enumerate([(0, 900), (900, 2100), (2100, 3000)]):
        table = pa.table({"elapsed (h)": x[a:b], "gauge (bar)": pa.array(y[a:b], from_pandas=True)})
        pq.write_table(table, folder / f"gauge-{i}.parquet", row_group_size=250)
    return folder


def test_dask_parquet_equals_numpy_engine(parts):
    before = {(c.laddr.ip, c.laddr.port) for c in listening_sockets()}
    seen = []

    def progress(done, total):
        # while the local cluster runs, every listening socket it opened is on loopback
        seen.extend(c for c in listening_sockets() if (c.laddr.ip, c.laddr.port) not in before)
        assert total == 3000

    ref, info_ref = sweep_source(parts, folds=7, seed=5, chunk_rows=400)
    res, info = sweep_source(parts, folds=7, seed=5, engine="dask", progress=progress)
    assert_same(res, ref)
    assert info["engine"] == "dask" and info["partitions"] == 4 + 5 + 4
    assert info["rows_dropped"] == info_ref["rows_dropped"] == 1
    assert seen and all(c.laddr.ip == "127.0.0.1" for c in seen)
    after = {(c.laddr.ip, c.laddr.port) for c in listening_sockets()}
    assert after <= before  # the cluster is closed


def test_dask_holdout_and_glob(parts):
    source = str(parts / "gauge-*.parquet")
    ref, _ = sweep_source(source, holdout=0.2, seed=3, degrees=range(0, 8))
    res, _ = sweep_source(source, holdout=0.2, seed=3, degrees=range(0, 8), engine="dask")
    assert_same(res, ref)
    assert res.display_n == ref.display_n and res.display_domain == ref.display_domain


def test_dask_csv_byte_ranges_equal_numpy_engine(tmp_path, monkeypatch):
    x, y = invented(2500, seed=22)
    path = tmp_path / "gauge.csv"
    with open(path, "w") as fh:
        fh.write("# Invented gauge log for tests.\n# Units: elapsed in hours, gauge in bar\nelapsed (h),gauge (bar)\n")
        for i, (a, b) in enumerate(zip(x, y, strict=False)):
            fh.write("oops,1\n" if i == 700 else f"{float(a)!r},{float(b)!r}\n")
    monkeypatch.setattr(dask_engine, "_DASK_CSV_BLOCK", 4000)  # many small byte ranges
    ref, info_ref = sweep_source(path, folds=5, seed=8)
    res, info = sweep_source(path, folds=5, seed=8, engine="dask")
    assert info["partitions"] > 10
    assert info["rows_dropped"] == info_ref["rows_dropped"] == 1
    assert_same(res, ref)


def test_dask_with_a_given_client(parts):
    import distributed

    with (
        distributed.LocalCluster(
            n_workers=1,
            threads_per_worker=2,
            processes=False,
            dashboard_address="127.0.0.1:0",
            worker_dashboard_address="127.0.0.1:0",
        ) as cluster,
        distributed.Client(cluster, set_as_default=False) as client,
    ):
        res, _ = sweep_source(parts, folds=4, engine="dask", scheduler=client)
        assert client.status == "running"  # a client the caller gave is left open
    ref, _ = sweep_source(parts, folds=4)
    assert_same(res, ref)


def test_dask_unreachable_scheduler(parts, monkeypatch):
    monkeypatch.setattr(dask_engine, "_CONNECT_TIMEOUT", "1s")
    with pytest.raises(FitError) as exc:
        sweep_source(parts, engine="dask", scheduler="tcp://127.0.0.1:9")
    assert "\n" not in str(exc.value) and str(exc.value).endswith(".")
    with pytest.raises(FitError):
        sweep_source(parts, engine="dask", scheduler=42)
