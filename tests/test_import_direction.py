"""The engine never imports the dashboard: `fitting` must not pull in `app`, dash or plotly.

Project rule (fitting/__init__.py and the developer notes): app imports fitting, never the reverse.
"""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
FORBIDDEN = ("app", "dash", "plotly")


def test_importing_fitting_loads_no_dashboard_modules():
    code = (
        "import json, sys\n"
        "import fitting\n"
        "from fitting import fit_polynomial, sweep_degrees\n"
        "import numpy as np\n"
        "x = np.linspace(0, 1, 50); y = x ** 2\n"
        "fit_polynomial(x, y, 2); sweep_degrees(x, y, degrees=range(4), folds=5)\n"
        f"print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in {FORBIDDEN!r})))\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120, check=True
    )
    assert json.loads(out.stdout.strip().splitlines()[-1]) == []


def _imported_roots(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(), filename=str(path))
    roots = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            roots.add(node.module.split(".")[0])
        elif isinstance(node, ast.Call) and getattr(node.func, "attr", getattr(node.func, "id", None)) in (
            "import_module",
            "__import__",
        ):
            for arg in node.args[:1]:
                if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
                    roots.add(arg.value.split(".")[0])
    return roots


def test_no_engine_source_imports_the_dashboard():
    files = sorted((ROOT / "fitting").rglob("*.py"))
    assert files, "fitting/ has no Python files"
    offenders = {str(p.relative_to(ROOT)): sorted(_imported_roots(p) & set(FORBIDDEN)) for p in files}
    assert {k: v for k, v in offenders.items() if v} == {}


def test_the_checker_itself_sees_imports(tmp_path):
    # guard against a checker that can never fail
    probe = tmp_path / "probe.py"
    probe.write_text(
        "import plotly.graph_objects as go\n"
        "from dash import html\n"
        "import importlib\n"
        "importlib.import_module('app.cli')\n"
    )
    assert _imported_roots(probe) >= {"plotly", "dash", "app"}
