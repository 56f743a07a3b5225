"""fit_polynomial speed against numpy's Polynomial.fit.

    .venv/bin/python benchmarks/bench_fit.py [--repeats 7]

Median wall times of interleaved runs on invented data, for n = 1e4, 1e5, 1e6 rows
and a few degrees, and the ratio ours / numpy. fit_polynomial also returns
standard errors, the covariance, R², and power-basis coefficients converted in
80-digit decimals; Polynomial.fit returns coefficients only.
"""

from __future__ import annotations

import argparse

import numpy as np
from _common import blas_limit, environment, interleaved_medians
from numpy.polynomial import Polynomial

from fitting import fit_polynomial  # noqa: E402


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--degrees", default="2,5,10,15")
    ap.add_argument(
        "--blas-threads",
        type=int,
        default=1,
        help=(
            "BLAS threads for both sides (default 1, what the engine uses for its own LAPACK calls); "
            "0 leaves the library default"
        ),
    )
    args = ap.parse_args(argv)
    with blas_limit(args.blas_threads or None):
        _run(args)


def _run(args) -> None:
    degrees = [int(d) for d in args.degrees.split(",")]
    print(environment())
    print(f"{'rows':>9s} {'degree':>6s} {'fit_polynomial':>15s} {'Polynomial.fit':>15s} {'ratio':>7s}")
    rng = np.random.default_rng(0)
    for n in (10_000, 100_000, 1_000_000):
        x = rng.uniform(0.0, 50.0, n)  # invented: a calibration-style curve with noise
        y = 3.0 + 0.2 * x - 0.004 * x**2 + np.sin(x / 5.0) + rng.normal(0.0, 0.05, n)
        reps = args.repeats if n < 1_000_000 else max(3, args.repeats // 2)
        for d in degrees:
            med = interleaved_medians(
                {
                    "ours": lambda x=x, y=y, d=d: fit_polynomial(x, y, d),
                    "numpy": lambda x=x, y=y, d=d: Polynomial.fit(x, y, d),
                },
                repeats=reps,
            )
            ratio = med["ours"] / med["numpy"]
            print(f"{n:9,d} {d:6d} {med['ours'] * 1e3:12.1f} ms {med['numpy'] * 1e3:12.1f} ms {ratio:6.2f}x")


if __name__ == "__main__":
    main()
