"""What the command line loads: `fit` and `sweep` run without scipy, scikit-learn or statsmodels, and `--help`
without the engine.

Why: importing scipy's linalg, special or optimize costs 0.2-0.4 s at start-up, more than a small file's
whole run (benchmarks/bench_cli_start.py measures the time; no test here does). A fresh interpreter runs
each command and lists the modules it ended with. Common practice, no source.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data" / "cubic_small_noisy.csv"
HEAVY = ("scipy", "sklearn", "statsmodels", "dash", "plotly")

PROBE = """
import contextlib, io, json, sys
from app.cli import main
codes = []
for argv in json.loads(sys.argv[1]):
    with contextlib.redirect_stdout(io.StringIO()):
        try:
            codes.append(main(argv))
        except SystemExit as exc:
            codes.append(exc.code)
print(json.dumps({"codes": codes, "modules": sorted({m.split(".")[0] for m in sys.modules})}))
"""


def _loaded(*commands: list[str]) -> dict:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    out = subprocess.run(
        [sys.executable, "-c", PROBE, json.dumps([list(c) for c in commands])],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_fit_and_sweep_on_a_small_file_load_no_heavy_library():
    got = _loaded(
        ["fit", str(SAMPLE), "--degree", "3"],
        ["fit", str(SAMPLE), "--degree", "2", "--weighting", "1/y2", "--json"],
        ["sweep", str(SAMPLE), "--stability-draws", "20"],
        ["sweep", str(SAMPLE), "--folds", "5", "--json"],
    )
    assert got["codes"] == [0, 0, 0, 0]
    assert [m for m in HEAVY if m in got["modules"]] == []
    assert "fitting" in got["modules"] and "numpy" in got["modules"]


def test_help_loads_neither_the_engine_nor_numpy():
    got = _loaded(["--help"], ["sweep", "--help"])
    assert got["codes"] == [0, 0]
    assert [m for m in ("fitting", "numpy", "pandas", *HEAVY) if m in got["modules"]] == []
