"""How the streaming degree sweep scales with the number of rows.

For n = 10^4, 10^5, 10^6 and 10^7 rows of the invented cooling-loop log
(``sample_data/make_samples.py --large N``), each sweep (degrees 0-12, 10
folds, numpy engine) runs in a fresh child process that reports its own wall
time and peak resident memory (``resource.getrusage(RUSAGE_SELF).ru_maxrss``).
Start-up (imports, and a warm-up sweep of 200 invented rows that triggers the
lazy imports and first-call set-up) is timed apart from the sweep.
The scaling exponent is the least-squares slope of log(time) on log(n); a
streaming pass should give a slope close to 1.

    python benchmarks/bench_scaling.py [--data DIR] [--sizes 10000,100000,...] [--engine numpy|dask]

Generated files go to sample_data/generated/ (ignored by git) unless --data is given.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
GENERATOR = ROOT / "sample_data" / "make_samples.py"
DEFAULT_DATA = ROOT / "sample_data" / "generated"

# Runs in the child: imports, then one timed sweep; prints one JSON line.
CHILD = r"""
import json, resource, sys, time
t0 = time.perf_counter()
sys.path.insert(0, {root!r})
import os, tempfile
from fitting import sweep_source
# warm-up on 200 invented rows: lazy imports and first-call set-up count as start-up, not as sweep time
with tempfile.TemporaryDirectory() as tmp:
    warm = os.path.join(tmp, "warm.csv")
    with open(warm, "w") as fh:
        fh.write("x,y\n" + "".join(f"{{i / 10}},{{(i * 7919) % 101 / 10}}\n" for i in range(200)))
    sweep_source(warm, degrees=range(0, 13), folds=10)
t1 = time.perf_counter()
res, info = sweep_source({path!r}, degrees=range(0, 13), folds=10, seed=0, engine={engine!r})
t2 = time.perf_counter()
print(json.dumps({{
    "startup_s": t1 - t0, "sweep_s": t2 - t1,
    "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
    "rows_used": info["rows_used"], "passes": info["passes"],
    "recommended_degree": res.recommended_degree,
}}))
"""

# Reference: pyarrow alone reading both columns of the CSV as float64, streamed.
READ_ONLY = r"""
import json, resource, time
import pyarrow as pa, pyarrow.csv as pcsv
t0 = time.perf_counter()
reader = pcsv.open_csv({path!r}, read_options=pcsv.ReadOptions(skip_rows={skip}, block_size=24 << 20),
                       convert_options=pcsv.ConvertOptions(
                           column_types={{"time (h)": pa.float64(), "pressure (kPa)": pa.float64()}}))
rows = sum(b.num_rows for b in reader)
print(json.dumps({{"read_s": time.perf_counter() - t0, "rows": rows,
                  "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}}))
"""


def ensure_csv(n: int, folder: Path) -> Path:
    path = folder / f"sensor_log_{n}.csv"
    if not path.exists():
        t = time.perf_counter()
        subprocess.run([sys.executable, str(GENERATOR), "--large", str(n), "--out", str(folder)], check=True)
        print(f"  (generated {path.name} in {time.perf_counter() - t:.1f} s)", flush=True)
    return path


def header_lines(path: Path) -> int:
    skip = 0
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("#") or not line.strip():
                skip += 1
            else:
                return skip
    return skip


def run_child(code: str) -> dict:
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"the child process failed:\n{out.stderr}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def sweep_in_child(path: Path, engine: str = "numpy") -> dict:
    t = time.perf_counter()
    rec = run_child(CHILD.format(root=str(ROOT), path=str(path), engine=engine))
    rec["process_s"] = time.perf_counter() - t
    return rec


def read_in_child(path: Path) -> dict:
    return run_child(READ_ONLY.format(path=str(path), skip=header_lines(path)))


def slope(ns, ts) -> float:
    return float(np.polyfit(np.log(ns), np.log(ts), 1)[0])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path, default=DEFAULT_DATA)
    ap.add_argument("--sizes", default="10000,100000,1000000,10000000")
    ap.add_argument("--engine", default="numpy", choices=["numpy", "dask"])
    args = ap.parse_args(argv)
    sizes = [int(s) for s in args.sizes.split(",")]
    args.data.mkdir(parents=True, exist_ok=True)
    print(
        f"streaming sweep, degrees 0-12 x 10 folds, engine {args.engine}, one child process per n, "
        f"load average {os.getloadavg()[0]:.2f}"
    )
    print(
        f"{'n':>10} {'sweep s':>9} {'process s':>10} {'peak RSS MB':>12} "
        f"{'pyarrow read s':>15} {'µs/row':>7} {'degree':>7}"
    )
    rows = []
    for n in sizes:
        path = ensure_csv(n, args.data)
        rec = sweep_in_child(path, args.engine)
        rd = read_in_child(path)
        rows.append((n, rec["sweep_s"]))
        print(
            f"{n:>10} {rec['sweep_s']:>9.3f} {rec['process_s']:>10.2f} {rec['peak_rss_mb']:>12.0f} "
            f"{rd['read_s']:>15.3f} {1e6 * rec['sweep_s'] / n:>7.3f} {rec['recommended_degree']:>7}",
            flush=True,
        )
    ns = [n for n, _ in rows]
    ts = [t for _, t in rows]
    if len(ns) >= 2:
        print(f"log-log slope of sweep time on n, all sizes: {slope(ns, ts):.2f}")
        big = [(n, t) for n, t in rows if n >= 100_000]
        if len(big) >= 2:
            print(f"log-log slope, n >= 1e5 (fixed start-up cost excluded): {slope(*zip(*big, strict=False)):.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
