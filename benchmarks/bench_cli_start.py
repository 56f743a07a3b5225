"""Wall time of the command line on a small file, against a plain pandas + numpy script.

    .venv/bin/python benchmarks/bench_cli_start.py [--repeats 7] [--file sample_data/cubic_small_noisy.csv]
                                                   [--bytecode installed|inherit|both]

Each run is a fresh interpreter, as a user starts it, so the time is mostly start-up:
importing Python, the engine and its libraries. Runs are interleaved (A, B, C, A, B, C,
...) so machine noise hits all alike; the medians and the ratio ours / reference are
printed, of wall time (the target: 1.5x the reference) and, beside it, of CPU time (user +
system of each run), which a loaded machine disturbs less.

    degreescope fit FILE --degree 3   vs  pandas.read_csv + numpy.polyfit(deg=3)
    degreescope sweep FILE            vs  pandas.read_csv + numpy.polyfit for degrees 0-12
                                          on 10 shuffled folds (train and test RMSE)

The reference does less than the command (no intake report, no standard errors, no
extended-precision refinement, no recommendation, no evidence, no back-calculated standards,
no verdict stability): it is the floor a user would compare against.

Python's bytecode cache. An installed program runs from compiled bytecode (pip writes it at
install time; an editable install writes it on the first run). A shell with
PYTHONDONTWRITEBYTECODE=1 never writes it, so every run compiles the engine's and the command's 11,000 lines
of source again (the libraries in site-packages keep their bytecode). ``--bytecode installed``
gives both sides a private, warmed bytecode cache (PYTHONPYCACHEPREFIX in a temporary
directory, PYTHONDONTWRITEBYTECODE cleared; the warm-up round writes it); ``inherit`` runs
with the caller's environment as it is; ``both`` (the default) prints a table for each.
Then the modules that dominate start-up are listed from ``python -X importtime``.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from _common import ROOT, environment

FIT_REFERENCE = """
import sys
import numpy as np
import pandas as pd
frame = pd.read_csv(sys.argv[1], comment="#")
x, y = frame.iloc[:, 0].to_numpy(float), frame.iloc[:, 1].to_numpy(float)
coef = np.polyfit(x, y, 3)
print(coef, np.sqrt(np.mean((np.polyval(coef, x) - y) ** 2)))
"""

SWEEP_REFERENCE = """
import sys
import numpy as np
import pandas as pd
frame = pd.read_csv(sys.argv[1], comment="#")
x, y = frame.iloc[:, 0].to_numpy(float), frame.iloc[:, 1].to_numpy(float)
folds = np.array_split(np.random.default_rng(0).permutation(x.size), 10)
for d in range(13):
    train, test = [], []
    for f in folds:
        keep = np.ones(x.size, bool)
        keep[f] = False
        if keep.sum() <= d:
            continue
        c = np.polyfit(x[keep], y[keep], d)
        train.append(np.sqrt(np.mean((np.polyval(c, x[keep]) - y[keep]) ** 2)))
        test.append(np.sqrt(np.mean((np.polyval(c, x[f]) - y[f]) ** 2)))
    print(d, np.mean(train), np.mean(test))
"""

PACKAGES = ("numpy", "pandas", "scipy.linalg", "sklearn", "pyarrow", "fitting", "app")


def _env(cache_dir: str | None) -> dict[str, str]:
    """The environment of a run: the caller's, or with a private bytecode cache (``cache_dir``)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONWARNINGS="ignore")
    if cache_dir is not None:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = cache_dir
    return env


def _runner(argv: list[str], env: dict[str, str]):
    def run() -> None:
        proc = subprocess.run(argv, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        if proc.returncode != 0:
            raise SystemExit(f"{' '.join(argv)} failed: {proc.stderr.decode()[-500:]}")

    return run


def import_costs(argv: list[str], env: dict[str, str]) -> dict[str, float]:
    """Cumulative import time (ms) of each top-level package in ``PACKAGES``, from ``python -X importtime``."""
    proc = subprocess.run(
        [sys.executable, "-X", "importtime", *argv], cwd=ROOT, env=env, capture_output=True, text=True, check=True
    )
    costs: dict[str, float] = {}
    for line in proc.stderr.splitlines():
        if not line.startswith("import time:") or "|" not in line:
            continue
        _, cumulative, name = (part.strip() for part in line.split(":", 1)[1].split("|"))
        if name in PACKAGES:  # a package's first (outermost) import holds its whole cumulative cost
            costs.setdefault(name, int(cumulative) / 1000.0)
    return costs


def _timed_medians(funcs: dict, repeats: int) -> dict[str, tuple[float, float]]:
    """Median wall and CPU time (s; CPU = user + system of the child) of each run, interleaved after a warm-up."""
    for f in funcs.values():
        f()
    times: dict[str, list[tuple[float, float]]] = {k: [] for k in funcs}
    for _ in range(repeats):
        for k, f in funcs.items():
            c0, t0 = _child_cpu(), time.perf_counter()
            f()
            times[k].append((time.perf_counter() - t0, _child_cpu() - c0))
    return {k: (float(np.median([w for w, _ in v])), float(np.median([c for _, c in v]))) for k, v in times.items()}


def _child_cpu() -> float:
    use = resource.getrusage(resource.RUSAGE_CHILDREN)
    return use.ru_utime + use.ru_stime


def _table(cases: dict, env: dict[str, str], repeats: int) -> None:
    head = f"{'command':16s} {'degreescope':>12s} {'pandas+numpy':>13s} {'ratio':>7s}"
    print(f"{head}   CPU: {'ours':>7s} {'ref':>7s} {'ratio':>6s}")
    funcs = {}
    for name, (ours, ref) in cases.items():
        funcs[f"{name}|ours"] = _runner(ours, env)
        funcs[f"{name}|ref"] = _runner(ref, env)
    med = _timed_medians(funcs, repeats)
    for name in cases:
        (a, ca), (b, cb) = med[f"{name}|ours"], med[f"{name}|ref"]
        print(
            f"{name:16s} {a * 1000:10.0f} ms {b * 1000:11.0f} ms {a / b:6.2f}x        "
            f"{ca * 1000:5.0f} ms {cb * 1000:4.0f} ms {ca / cb:5.2f}x"
        )


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--file", default=str(ROOT / "sample_data" / "cubic_small_noisy.csv"))
    ap.add_argument("--bytecode", choices=("installed", "inherit", "both"), default="both")
    args = ap.parse_args(argv)
    data = str(Path(args.file).resolve())
    py = sys.executable
    cases = {
        "fit --degree 3": (
            [py, "-m", "app.cli", "fit", data, "--degree", "3"],
            [py, "-c", FIT_REFERENCE, data],
        ),
        "sweep": ([py, "-m", "app.cli", "sweep", data], [py, "-c", SWEEP_REFERENCE, data]),
    }
    print(environment())
    print(f"file: {data}; {args.repeats} interleaved runs each, fresh interpreter per run")
    with tempfile.TemporaryDirectory(prefix="bench-bytecode-") as cache_dir:
        modes = []
        if args.bytecode in ("installed", "both"):
            modes.append(("bytecode cached, as installed (a private warmed cache for both sides)", _env(cache_dir)))
        if args.bytecode in ("inherit", "both"):
            inherited = os.environ.get("PYTHONDONTWRITEBYTECODE")
            note = "no bytecode written: the engine is compiled on every run" if inherited else "bytecode as usual"
            modes.append((f"caller's environment (PYTHONDONTWRITEBYTECODE={inherited or 'unset'}: {note})", _env(None)))
        for title, env in modes:
            print(f"\n{title}")
            _table(cases, env, args.repeats)
        title, env = modes[0]
        print(f"\nimport cost (ms, cumulative, one run each, {title.split(' (')[0]}; nested: fitting's figure")
        print("includes the pandas and numpy it imports first; scipy and sklearn would show here if loaded):")
        for name, (ours, ref) in cases.items():
            for who, argv_ in (("degreescope", ours[1:]), ("reference", ref[1:])):
                costs = import_costs(argv_, env)
                shown = ", ".join(f"{k} {v:.0f}" for k, v in sorted(costs.items(), key=lambda kv: -kv[1]))
                print(f"  {name:16s} {who:12s} {shown}")


if __name__ == "__main__":
    main()
