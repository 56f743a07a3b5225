"""Verdict stability cost: 200 redraws of the folds against one degree sweep.

    .venv/bin/python benchmarks/bench_stability.py [--rows 100000] [--draws 200] [--repeats 3]

On --rows rows of unsorted invented data, times verdict_stability(draws=--draws) and one
sweep_degrees call with the same degrees (0-20) and folds (10), in the same run (medians of
interleaved repeats), and prints the ratio. The design target is a ratio of at most 20: the rows
are reduced once into mini-blocks, each redraw only merges their small factors, and
sweep_from_blocks runs with diagnostics=False (only what the recommendation needs).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from _common import blas_limit, environment

from fitting import sweep_degrees, verdict_stability


def invented_data(n: int, seed: int = 0):
    # invented: a sensor whose response bends, rows in random order (unsorted x)
    rng = np.random.default_rng(seed)
    x = rng.uniform(0.0, 50.0, n)
    y = 3.0 + 0.8 * x - 0.004 * x**2 + rng.normal(0.0, 0.6, n)
    return x, y


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--draws", type=int, default=200)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--blas-threads", type=int, default=1)
    args = ap.parse_args()
    x, y = invented_data(args.rows)
    degrees = range(0, 21)
    with blas_limit(args.blas_threads or None):
        sweep_degrees(x, y, degrees=degrees, folds=10)  # warm-up
        t_sweep, t_stab = [], []
        for _ in range(args.repeats):  # interleaved: sweeps before and after each stability run
            for _ in range(3):
                t0 = time.perf_counter()
                s = sweep_degrees(x, y, degrees=degrees, folds=10, seed=0)
                t_sweep.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            v = verdict_stability(x, y, draws=args.draws, degrees=degrees, folds=10, seed=0)
            t_stab.append(time.perf_counter() - t0)
    ms, mv = float(np.median(t_sweep)), float(np.median(t_stab))
    print(environment())
    print(
        f"{args.rows:,} rows, degrees 0-20, 10 folds; medians of {args.repeats} stability runs, "
        f"each between sweeps ({len(t_sweep)} sweeps)"
    )
    print(f"  sweep_degrees (one sweep)               {ms * 1e3:9.1f} ms   verdict: degree {s.recommended_degree}")
    print(f"  verdict_stability (draws={args.draws})       {mv * 1e3:9.1f} ms   {v.sentence}")
    print(f"  method: {v.method}; repeats per redraw {v.repeats}")
    print(f"  ratio stability / sweep = {mv / ms:.1f}x  (target <= 20)")


if __name__ == "__main__":
    main()
