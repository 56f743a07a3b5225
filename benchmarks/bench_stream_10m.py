"""The 10-million-row CSV sweep against its targets: 10 s and 1.5 GB peak memory.

Sweeps the invented cooling-loop log (``sample_data/make_samples.py --large
10000000``, about 185 MB; generated if missing) over degrees 0-12 with 10 folds
in a fresh child process, and prints its time and peak resident memory beside
the targets. As a reference, the same run times pyarrow alone streaming the
two columns of the file.

    python benchmarks/bench_stream_10m.py [--data DIR] [--engine numpy|dask]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_scaling import DEFAULT_DATA, ensure_csv, read_in_child, sweep_in_child  # noqa: E402

N = 10_000_000
TARGET_S = 10.0
TARGET_MB = 1536.0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path, default=DEFAULT_DATA)
    ap.add_argument("--engine", default="numpy", choices=["numpy", "dask"])
    args = ap.parse_args(argv)
    args.data.mkdir(parents=True, exist_ok=True)
    path = ensure_csv(N, args.data)
    print(
        f"{path} ({os.path.getsize(path) / 1e6:.0f} MB), {os.cpu_count()} cores, engine {args.engine}, "
        f"load average before {os.getloadavg()[0]:.2f}"
    )
    rd = read_in_child(path)
    print(f"reference, pyarrow alone streaming both columns: {rd['read_s']:.2f} s, peak RSS {rd['peak_rss_mb']:.0f} MB")
    rec = sweep_in_child(path, args.engine)
    ok_t = rec["process_s"] <= TARGET_S
    ok_m = rec["peak_rss_mb"] <= TARGET_MB
    print(
        f"sweep (degrees 0-12 x 10 folds, {rec['passes']} passes over the file): {rec['sweep_s']:.2f} s "
        f"(+ {rec['startup_s']:.2f} s start-up; whole process {rec['process_s']:.2f} s) "
        f"-> target {TARGET_S:.0f} s: {'met' if ok_t else 'MISSED'}"
    )
    print(f"peak RSS {rec['peak_rss_mb']:.0f} MB -> target {TARGET_MB:.0f} MB: {'met' if ok_m else 'MISSED'}")
    print(f"rows used {rec['rows_used']}, recommended degree {rec['recommended_degree']}")
    print(f"load average after the run (other work on the machine slows it): {os.getloadavg()[0]:.2f}")
    return 0 if ok_t and ok_m else 1


if __name__ == "__main__":
    raise SystemExit(main())
