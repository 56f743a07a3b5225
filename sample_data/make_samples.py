"""Write degreescope's invented sample datasets.

Every dataset here is invented for demonstration. None of it is a
measurement of any real device, vehicle, assay or plant.

Committed files (small; rewritten byte for byte by running this script):

    file                    seed      rows  x column          y column
    sensor_calibration.csv  20261201   120  output (mV)       temperature (°C)   (+ batch 1-4)
    van_fuel.csv            20261202   200  speed (km/h)      fuel use (L/100 km)
    dose_response.csv       20261203    30  dose (mg/L)       absorbance (AU)
    cubic_small_noisy.csv   20261204    30  x (a.u.)          y (a.u.)

Generated on demand, never committed (seed 20261205):

    generated/sensor_log_<N>.csv        N rows of time (h) against pressure (kPa)

Usage:

    python sample_data/make_samples.py                     # rewrite the committed files
    python sample_data/make_samples.py --out /tmp/samples  # write them somewhere else
    python sample_data/make_samples.py --large 10000000    # write generated/sensor_log_10000000.csv

The large file is written in chunks of CHUNK_ROWS rows, each formatted with
numpy's vectorised string formatting, so memory use stays flat whatever N is.
Only numpy is needed.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
INVENTED = "Invented data for demonstration; not measurements of any real device."
COMMAND = "python sample_data/make_samples.py"

SEED_SENSOR_CALIBRATION = 20261201
SEED_VAN_FUEL = 20261202
SEED_DOSE_RESPONSE = 20261203
SEED_CUBIC_SMALL_NOISY = 20261204
SEED_SENSOR_LOG = 20261205

#: rows formatted and written per step when streaming the large file
CHUNK_ROWS = 250_000
#: the large log always spans this many hours; N sets the sampling interval
LOG_HOURS = 720.0


# --------------------------------------------------------------------------
# Formatting: numpy's vectorised %-formatting, one call per column per chunk.
# --------------------------------------------------------------------------


def _format_block(columns: list[np.ndarray], formats: list[str]) -> bytes:
    """Return the CSV text of equal-length columns, one ``\\n``-ended line per row.

    Each column is formatted by ``numpy.strings.mod`` with its own %-format,
    then the columns are joined element-wise. No Python loop runs per row.
    """
    if len(columns) != len(formats):
        raise ValueError("expected one format per column")
    n = len(columns[0])
    if any(len(c) != n for c in columns):
        raise ValueError("expected all columns to have the same length")
    if n == 0:
        return b""
    line = np.strings.mod(formats[0], columns[0])
    for column, fmt in zip(columns[1:], formats[1:], strict=False):
        line = np.strings.add(np.strings.add(line, ","), np.strings.mod(fmt, column))
    line = np.strings.add(line, "\n")
    return "".join(line.tolist()).encode("utf-8")


def _header(
    title: str, scenario: str, units: str, seed: int, names: list[str], *, extra: list[str] = (), command: str = COMMAND
) -> bytes:
    """The ``#`` comment block and the header row of one file."""
    lines = [
        f"# {title}",
        f"# {INVENTED}",
        f"# Scenario: {scenario}",
        f"# Units: {units}",
        *(f"# {e}" for e in extra),
        f"# Made by: {command} (seed {seed})",
        ",".join(names),
    ]
    return ("\n".join(lines) + "\n").encode("utf-8")


def _fixed(values: np.ndarray, decimals: int) -> np.ndarray:
    """Round to the written resolution; ``+ 0.0`` turns -0.0 into 0.0."""
    return np.round(values, decimals) + 0.0


def _write_atomically(path: Path, chunks) -> int:
    """Write an iterable of byte strings to ``path`` via a temporary name."""
    path.parent.mkdir(parents=True, exist_ok=True)
    part = path.with_name(path.name + ".part")
    size = 0
    try:
        with open(part, "wb") as fh:
            for chunk in chunks:
                fh.write(chunk)
                size += len(chunk)
        os.replace(part, path)
    finally:
        if part.exists():
            part.unlink()
    return size


# --------------------------------------------------------------------------
# The committed datasets
# --------------------------------------------------------------------------


def sensor_calibration() -> bytes:
    """Temperature-sensor calibration: 4 runs x 30 points, x = output (mV), y = temperature (°C).

    Invented sensor: V = 500 + 10 T - 0.004 T^2 + 2.5e-5 T^3 mV (monotonic over
    -40..125 °C), a per-run offset (sd 1.0 mV, re-mounting the sensor), output
    noise sd 0.8 mV, reference-thermometer noise sd 0.02 °C.
    """
    rng = np.random.default_rng(SEED_SENSOR_CALIBRATION)
    runs, per_run = 4, 30
    steps = np.linspace(-40.0, 125.0, per_run)
    run_offset_mv = rng.normal(0.0, 1.0, size=runs)
    temps, volts, batch = [], [], []
    for run in range(runs):
        t = np.clip(steps + rng.uniform(-1.5, 1.5, size=per_run), -40.0, 125.0)
        v = 500.0 + 10.0 * t - 0.004 * t**2 + 2.5e-5 * t**3
        v = v + run_offset_mv[run] + rng.normal(0.0, 0.8, size=per_run)
        t_ref = t + rng.normal(0.0, 0.02, size=per_run)
        volts.append(v)
        temps.append(t_ref)
        batch.append(np.full(per_run, run + 1))
    head = _header(
        "Temperature sensor calibration (invented)",
        "Four calibration runs each ramp a climate chamber from -40 to 125 °C and pair an "
        "invented sensor's output voltage with a reference thermometer's reading, so that a "
        "curve from output to temperature can be fitted.",
        "output (mV) = sensor output voltage in millivolts; temperature (°C) = reference "
        "temperature in degrees Celsius; batch = calibration run number, 1 to 4 (no unit).",
        SEED_SENSOR_CALIBRATION,
        ["output (mV)", "temperature (°C)", "batch"],
        extra=[
            "Caution: a demonstration only. A real calibration follows the applicable "
            "standards, local codes and accredited or licensed practice."
        ],
    )
    body = _format_block(
        [_fixed(np.concatenate(volts), 2), _fixed(np.concatenate(temps), 3), np.concatenate(batch)],
        ["%.2f", "%.3f", "%d"],
    )
    return head + body


def van_fuel() -> bytes:
    """Delivery-van fuel use against cruising speed: U-shaped, 200 rows.

    Invented van: fuel = 3.5 + 220 / v + 0.0007 v^2 L/100 km (the 1/v part from
    engine running losses, the v^2 part from air drag), noise sd 0.45 L/100 km.
    """
    rng = np.random.default_rng(SEED_VAN_FUEL)
    n = 200
    v = _fixed(rng.uniform(30.0, 120.0, size=n), 1)
    fuel = 3.5 + 220.0 / v + 0.0007 * v**2 + rng.normal(0.0, 0.45, size=n)
    head = _header(
        "Delivery van fuel use against cruising speed (invented)",
        "An invented delivery van logged its average fuel use over 200 steady cruising "
        "stretches of a test route, each driven at a different speed.",
        "speed (km/h) = cruising speed in kilometres per hour; fuel use (L/100 km) = "
        "fuel used in litres per 100 kilometres.",
        SEED_VAN_FUEL,
        ["speed (km/h)", "fuel use (L/100 km)"],
    )
    return head + _format_block([v, _fixed(fuel, 2)], ["%.1f", "%.2f"])


def dose_response() -> bytes:
    """Assay signal that saturates with dose: 30 rows, small and noisy.

    Invented assay: absorbance = 0.05 + 1.2 d / (6 + d) AU (a hyperbolic,
    Emax-type curve), noise sd 0.04 AU. Doses are spread geometrically from
    0.5 to 60 mg/L plus one blank, so most points sit on the steep part.
    """
    rng = np.random.default_rng(SEED_DOSE_RESPONSE)
    dose = np.geomspace(0.5, 60.0, 29) * np.exp(rng.normal(0.0, 0.05, size=29))
    dose = _fixed(np.concatenate([[0.0], dose]), 2)
    signal = 0.05 + 1.2 * dose / (6.0 + dose) + rng.normal(0.0, 0.04, size=dose.size)
    head = _header(
        "Assay signal against dose (invented)",
        "An invented plate assay read the absorbance of 30 wells, one blank and 29 doses "
        "from 0.5 to 60 mg/L, and the signal levels off at high dose.",
        "dose (mg/L) = dose in milligrams per litre; absorbance (AU) = absorbance in absorbance units.",
        SEED_DOSE_RESPONSE,
        ["dose (mg/L)", "absorbance (AU)"],
        extra=["Caution: a demonstration only, not for clinical, safety or regulatory use."],
    )
    return head + _format_block([dose, _fixed(signal, 3)], ["%.2f", "%.3f"])


def cubic_small_noisy() -> bytes:
    """An invented 30-point cubic with sizeable noise.

    y = 0.6 x^3 - 0.5 x^2 - 2.5 x + 1, x uniform on [-2.5, 2.5], noise sd 1.5.
    """
    rng = np.random.default_rng(SEED_CUBIC_SMALL_NOISY)
    n = 30
    x = _fixed(np.sort(rng.uniform(-2.5, 2.5, size=n)), 3)
    y = 0.6 * x**3 - 0.5 * x**2 - 2.5 * x + 1.0 + rng.normal(0.0, 1.5, size=n)
    head = _header(
        "Small noisy cubic (invented)",
        "A made-up cubic, y = 0.6x^3 - 0.5x^2 - 2.5x + 1, sampled at 30 points with noise "
        "of standard deviation 1.5, to show how much one small holdout's verdict can vary.",
        "x (a.u.) and y (a.u.) are in arbitrary units.",
        SEED_CUBIC_SMALL_NOISY,
        ["x (a.u.)", "y (a.u.)"],
    )
    return head + _format_block([x, _fixed(y, 3)], ["%.3f", "%.3f"])


COMMITTED = {
    "sensor_calibration.csv": sensor_calibration,
    "van_fuel.csv": van_fuel,
    "dose_response.csv": dose_response,
    "cubic_small_noisy.csv": cubic_small_noisy,
}


# --------------------------------------------------------------------------
# The large, generated-on-demand sensor log
# --------------------------------------------------------------------------


def sensor_log_chunks(n_rows: int, *, chunk_rows: int = CHUNK_ROWS):
    """Yield the bytes of ``sensor_log_<n_rows>.csv``, header first, then chunks.

    Invented loop: pressure = 250 + 0.015 t - 1.2e-5 t^2 kPa over t in
    [0, 720) h, noise sd 0.4 kPa. The log always spans 720 h; more rows mean
    a shorter sampling interval. The noise is drawn chunk after chunk from one
    generator, so the bytes do not depend on ``chunk_rows``.
    """
    if n_rows < 1:
        raise ValueError(f"expected a positive number of rows, got {n_rows}")
    if chunk_rows < 1:
        raise ValueError(f"expected a positive chunk size, got {chunk_rows}")
    rng = np.random.default_rng(SEED_SENSOR_LOG)
    step_h = LOG_HOURS / n_rows
    yield _header(
        f"Cooling-loop pressure log, {n_rows} rows (invented)",
        "A data logger on an invented cooling-water loop recorded the loop pressure at even "
        f"intervals for {LOG_HOURS:g} hours while it drifted slowly as the loop settled.",
        "time (h) = hours since logging started; pressure (kPa) = gauge pressure in kilopascals.",
        SEED_SENSOR_LOG,
        ["time (h)", "pressure (kPa)"],
        command=f"{COMMAND} --large {n_rows}",
    )
    for start in range(0, n_rows, chunk_rows):
        stop = min(start + chunk_rows, n_rows)
        t = np.arange(start, stop, dtype=np.float64) * step_h
        p = 250.0 + 0.015 * t - 1.2e-5 * t**2 + rng.normal(0.0, 0.4, size=stop - start)
        yield _format_block([t, p], ["%.9g", "%.6g"])


# --------------------------------------------------------------------------
# Command line
# --------------------------------------------------------------------------


def _positive_int(text: str) -> int:
    try:
        value = int(text.replace("_", ""))
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number of rows, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected at least 1 row, got {value}")
    return value


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="make_samples.py",
        description="Write degreescope's invented sample datasets (numpy only, fixed seeds).",
    )
    parser.add_argument(
        "--large",
        type=_positive_int,
        metavar="N",
        help="instead of the committed files, write sensor_log_N.csv with N rows "
        "(into sample_data/generated/ unless --out is given)",
    )
    parser.add_argument(
        "--out",
        type=Path,
        metavar="DIR",
        help="folder to write into (default: sample_data/ for the committed files, sample_data/generated/ for --large)",
    )
    args = parser.parse_args(argv)

    started = time.perf_counter()
    if args.large is not None:
        out = args.out if args.out is not None else HERE / "generated"
        path = out / f"sensor_log_{args.large}.csv"
        size = _write_atomically(path, sensor_log_chunks(args.large))
        print(f"wrote {path} ({args.large} rows, {size / 1e6:.1f} MB) in {time.perf_counter() - started:.1f} s")
        return 0

    out = args.out if args.out is not None else HERE
    for name, build in COMMITTED.items():
        data = build()
        _write_atomically(out / name, [data])
        print(f"wrote {out / name} ({len(data)} bytes)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
