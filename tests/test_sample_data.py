"""Checks of the invented sample datasets in sample_data/.

Outside references: pandas.read_csv (comment="#") must read every file the way
the header says, and numpy's own polyfit/corrcoef check the shapes the
datasets are meant to have. File layout rules (UTF-8, comma, "." decimal, units
in parentheses) are common practice, no source. The generator must rewrite
the committed files byte for byte.
"""

from __future__ import annotations

import importlib.util
import re
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_data"
GENERATOR = SAMPLES / "make_samples.py"
INVENTED = "# Invented data for demonstration; not measurements of any real device."

# file -> (seed, data rows, header columns)
EXPECTED = {
    "sensor_calibration.csv": (20261201, 120, ["output (mV)", "temperature (°C)", "batch"]),
    "van_fuel.csv": (20261202, 200, ["speed (km/h)", "fuel use (L/100 km)"]),
    "dose_response.csv": (20261203, 30, ["dose (mg/L)", "absorbance (AU)"]),
    "cubic_small_noisy.csv": (20261204, 30, ["x (a.u.)", "y (a.u.)"]),
}
UNIT_NAME = re.compile(r"^[^()]+ \([^()]+\)$")


def _split(raw: bytes) -> tuple[list[str], str, list[str]]:
    """Comment lines, header row, data lines of one file."""
    text = raw.decode("utf-8")
    lines = text.split("\n")
    assert lines[-1] == "", "file must end with a newline"
    lines = lines[:-1]
    n_comments = 0
    while lines[n_comments].startswith("#"):
        n_comments += 1
    return lines[:n_comments], lines[n_comments], lines[n_comments + 1 :]


def _run_generator(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, str(GENERATOR), *args], capture_output=True, text=True, timeout=120)


def _load_generator_module():
    spec = importlib.util.spec_from_file_location("make_samples_under_test", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_committed_file_layout(name):
    seed, rows, columns = EXPECTED[name]
    path = SAMPLES / name
    assert path.is_file(), f"{name} is missing; run python sample_data/make_samples.py"
    raw = path.read_bytes()
    assert not raw.startswith(b"\xef\xbb\xbf"), "no byte-order mark"
    assert b"\r" not in raw, "line ends must be \\n"
    comments, header, data = _split(raw)

    assert comments[1] == INVENTED
    assert comments[0].startswith("# ") and "(invented)" in comments[0]
    assert any(c.startswith("# Scenario: ") for c in comments)
    assert any(c.startswith("# Units: ") for c in comments)
    assert comments[-1] == f"# Made by: python sample_data/make_samples.py (seed {seed})"

    assert header.split(",") == columns
    for column in columns[:2]:
        assert UNIT_NAME.match(column), f"x and y names carry units in parentheses: {column!r}"
    assert len(data) == rows
    assert all(line.count(",") == len(columns) - 1 for line in data)

    # Outside reference: pandas reads it as a plain numeric table.
    frame = pd.read_csv(path, comment="#")
    assert list(frame.columns) == columns
    assert len(frame) == rows
    for column in columns:
        assert pd.api.types.is_numeric_dtype(frame[column]), column
        assert frame[column].notna().all(), column


def test_committed_files_are_small():
    total = sum((SAMPLES / name).stat().st_size for name in EXPECTED)
    assert total < 200_000


def test_sensor_calibration_shape():
    frame = pd.read_csv(SAMPLES / "sensor_calibration.csv", comment="#")
    volts, temps = frame["output (mV)"].to_numpy(), frame["temperature (°C)"].to_numpy()
    assert frame["batch"].value_counts().sort_index().to_dict() == {1: 30, 2: 30, 3: 30, 4: 30}
    assert -41.0 < temps.min() < -38.0 and 123.0 < temps.max() < 126.0
    assert np.corrcoef(volts, temps)[0, 1] > 0.999
    # Gently cubic (numpy.polyfit as reference): degree 3 clearly beats degree 2,
    # degree 5 adds next to nothing.
    rms = {d: np.sqrt(np.mean((np.polyval(np.polyfit(volts, temps, d), volts) - temps) ** 2)) for d in (2, 3, 5)}
    assert rms[3] < 0.7 * rms[2]
    assert rms[5] > 0.9 * rms[3]


def test_van_fuel_is_u_shaped():
    frame = pd.read_csv(SAMPLES / "van_fuel.csv", comment="#")
    speed, fuel = frame["speed (km/h)"].to_numpy(), frame["fuel use (L/100 km)"].to_numpy()
    a, b, _ = np.polyfit(speed, fuel, 2)
    assert a > 0, "opens upward"
    assert speed.min() + 10 < -b / (2 * a) < speed.max() - 10, "lowest point inside the range"


def test_dose_response_saturates_and_overfits():
    frame = pd.read_csv(SAMPLES / "dose_response.csv", comment="#")
    dose, signal = frame["dose (mg/L)"].to_numpy(), frame["absorbance (AU)"].to_numpy()
    assert dose.min() == 0.0 and 50.0 < dose.max() < 70.0
    order = np.argsort(dose)
    top, middle = signal[order[-5:]].mean(), signal[order[10:15]].mean()
    assert top > 0.9 and top - middle < 0.6
    # A degree-9 polynomial (numpy.polynomial.Polynomial.fit as reference) is
    # far off the plateau at 1.5 times the highest dose.
    p9 = np.polynomial.Polynomial.fit(dose, signal, 9)
    assert abs(p9(1.5 * dose.max()) - top) > 5.0


def test_generator_reproduces_committed_files(tmp_path):
    result = _run_generator("--out", str(tmp_path))
    assert result.returncode == 0, result.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(EXPECTED)
    for name in EXPECTED:
        assert (tmp_path / name).read_bytes() == (SAMPLES / name).read_bytes(), name


def test_large_writes_requested_rows(tmp_path):
    result = _run_generator("--large", "1000", "--out", str(tmp_path))
    assert result.returncode == 0, result.stderr
    path = tmp_path / "sensor_log_1000.csv"
    raw = path.read_bytes()
    comments, header, data = _split(raw)
    assert INVENTED in comments
    assert comments[-1] == ("# Made by: python sample_data/make_samples.py --large 1000 (seed 20261205)")
    assert header == "time (h),pressure (kPa)"
    assert len(data) == 1000

    frame = pd.read_csv(path, comment="#")
    assert len(frame) == 1000
    t = frame["time (h)"].to_numpy()
    assert t[0] == 0.0
    np.testing.assert_allclose(np.diff(t), 0.72, rtol=1e-9)
    p = frame["pressure (kPa)"].to_numpy()
    assert p.min() > 245.0 and p.max() < 260.0

    # Same request, same bytes; and the chunk size does not change the bytes.
    again = tmp_path / "again"
    assert _run_generator("--large", "1000", "--out", str(again)).returncode == 0
    assert (again / "sensor_log_1000.csv").read_bytes() == raw
    module = _load_generator_module()
    assert b"".join(module.sensor_log_chunks(1000, chunk_rows=7)) == raw
    assert b"".join(module.sensor_log_chunks(1000, chunk_rows=1000)) == raw


@pytest.mark.parametrize("bad", ["0", "-5", "many", "1.5"])
def test_large_rejects_bad_row_counts(tmp_path, bad):
    result = _run_generator("--large", bad, "--out", str(tmp_path))
    assert result.returncode != 0
    assert "row" in result.stderr
    assert not any(tmp_path.iterdir())


@pytest.mark.slow
def test_large_million_rows_streams_in_bounded_memory(tmp_path):
    # Measure the generator alone: a small parent process runs it and reports
    # its children's peak resident memory (getrusage, kilobytes on Linux).
    probe = (
        "import resource, subprocess, sys\n"
        f"subprocess.run([sys.executable, {str(GENERATOR)!r}, '--large', '1000000',"
        f" '--out', {str(tmp_path)!r}], check=True, capture_output=True)\n"
        "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
    )
    started = time.perf_counter()
    result = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    elapsed = time.perf_counter() - started
    assert result.returncode == 0, result.stderr
    peak_mb = int(result.stdout.strip()) / 1024
    assert peak_mb < 300, f"peak memory {peak_mb:.0f} MB"
    assert elapsed < 60
    raw = (tmp_path / "sensor_log_1000000.csv").read_bytes()
    _, _, data = _split(raw)
    assert len(data) == 1_000_000


def test_readme_matches_files():
    readme = (SAMPLES / "README.md").read_text(encoding="utf-8")
    assert "invented" in readme.lower()
    for name, (seed, rows, _) in EXPECTED.items():
        row = next((line for line in readme.splitlines() if line.startswith(f"| `{name}` |")), None)
        assert row is not None, f"README table lists {name}"
        cells = [c.strip() for c in row.strip("|").split("|")]
        assert int(cells[1]) == rows and int(cells[-1]) == seed, row
