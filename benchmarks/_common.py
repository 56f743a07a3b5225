"""Shared helpers for the benchmarks: interleaved median timing and environment notes."""

from __future__ import annotations

import platform
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def interleaved_medians(funcs: dict, repeats: int, warmup: int = 1) -> dict[str, float]:
    """Median wall time (s) of each callable, run in turn A, B, A, B, ... so machine noise hits all alike."""
    for _ in range(warmup):
        for f in funcs.values():
            f()
    times = {k: [] for k in funcs}
    for _ in range(repeats):
        for k, f in funcs.items():
            t0 = time.perf_counter()
            f()
            times[k].append(time.perf_counter() - t0)
    return {k: float(np.median(v)) for k, v in times.items()}


def environment() -> str:
    try:
        from threadpoolctl import threadpool_info

        blas = ", ".join(
            f"{i['internal_api']} {i.get('version')} ({i['num_threads']} threads)"
            for i in threadpool_info()
            if i["user_api"] == "blas"
        )
    except Exception:  # pragma: no cover
        blas = "unknown"
    import os

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    return (
        f"python {platform.python_version()}, numpy {np.__version__}, {platform.machine()}, "
        f"{os.cpu_count()} CPUs, load {load:.1f}; BLAS: {blas}"
    )


def blas_limit(threads: int | None):
    """Context limiting BLAS threads for the whole benchmark (both sides alike); None leaves them."""
    import contextlib

    if threads is None:
        return contextlib.nullcontext()
    from threadpoolctl import threadpool_limits

    return threadpool_limits(limits=threads, user_api="blas")
