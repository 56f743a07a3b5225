"""One verdict rule: `degreescope sweep FILE` and the dashboard recommend the same degree.

The rule itself is `fitting.verdict_sweep` (10-fold cross-validation, repeated 5 times up to
5,000 rows, one group held out at a time with a group column, whole x levels held out when x
has replicates; the lowest degree within one standard error of the best). Both front ends
must reach it with the same defaults; this checks the outcome on files neither was tuned on:
the invented samples, the intake corpus and invented designs made here (replicated levels, a
group column, a steep curve). Reference: the engine's own rule, called directly; the check is
that no front end adds a second rule.
"""

from __future__ import annotations

import io
import json
from contextlib import redirect_stdout
from pathlib import Path

import numpy as np
import pytest

import fitting
from app.cli import main as cli_main
from app.service import Columns, FitService
from app.store import DatasetStore

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "tests" / "data" / "csv_corpus"


def _invented_files(tmp: Path) -> list[Path]:
    """Invented designs: replicated levels with a true quadratic, a steep cubic, a grouped line."""
    rng = np.random.default_rng(20261202)
    files = []
    levels = np.repeat([0.5, 1, 2, 4, 6, 8, 10, 12], 3)
    y = 3 + 1.5 * levels - 0.08 * levels**2 + rng.normal(0, 0.05, levels.size)
    files.append(_write(tmp / "invented_replicates.csv", "level (mg/L),signal (mAU)", levels, y))
    x = rng.uniform(-2, 3, 60)
    y = 0.4 * x**3 - x**2 + 2 + rng.normal(0, 0.3, x.size)
    files.append(_write(tmp / "invented_cubic.csv", "x,y", x, y))
    x = np.tile(np.linspace(0, 50, 12), 4)
    batch = np.repeat([1, 2, 3, 4], 12)
    y = 0.2 * x + 0.3 * batch + rng.normal(0, 0.1, x.size)
    path = tmp / "invented_batches.csv"
    path.write_text(
        "load (kN),reading (mV),batch\n"
        + "".join(f"{float(a)!r},{float(b)!r},{c}\n" for a, b, c in zip(x, y, batch, strict=True))
    )
    files.append(path)
    return files


def _write(path: Path, header: str, x, y) -> Path:
    path.write_text(header + "\n" + "".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(x, y, strict=True)))
    return path


def _held_back(tmp: Path) -> list[Path]:
    samples = sorted((ROOT / "sample_data").glob("*.csv"))
    corpus = [p for p in sorted(CORPUS.iterdir()) if p.name[:2].isdigit()]
    return samples + corpus + _invented_files(tmp)


def _cli_recommendation(path: Path, *extra: str) -> int | None:
    out = io.StringIO()
    with redirect_stdout(out):
        code = cli_main(["sweep", str(path), "--json", *extra])
    if code != 0:
        return None
    return json.loads(out.getvalue())["recommended_degree"]


def _dashboard_recommendation(service: FitService, path: Path, group: str | None = None) -> int:
    info = service.load_path(path)
    view = service.split_view(info.id, Columns(info.default_x, info.default_y, group=group), _default_split())
    return int(view.recommended_degree)


def _default_split():
    from app.service import SplitSettings

    return SplitSettings()


@pytest.fixture(scope="module")
def service():
    return FitService(DatasetStore(), upload_limit_bytes=64 * 2**20)


def test_the_command_line_and_the_dashboard_recommend_the_same_degree(tmp_path, service):
    compared = 0
    for path in _held_back(tmp_path):
        try:
            table = fitting.read_table(path)
            table.select()
        except fitting.DegreescopeError:
            continue  # files the intake refuses have no recommendation on either side
        cli = _cli_recommendation(path)
        if cli is None:
            continue
        assert _dashboard_recommendation(service, path) == cli, path.name
        compared += 1
    assert compared >= 30  # the samples, most of the corpus and the invented designs


def test_with_a_group_column_both_hold_out_one_group_at_a_time(tmp_path, service):
    path = _invented_files(tmp_path)[2]
    cli = _cli_recommendation(path, "--group", "batch")
    assert cli is not None
    assert _dashboard_recommendation(service, path, group="batch") == cli


def test_both_state_the_rule_they_used(tmp_path):
    path = _invented_files(tmp_path)[0]
    out = io.StringIO()
    with redirect_stdout(out):
        assert cli_main(["sweep", str(path), "--json"]) == 0
    rule = json.loads(out.getvalue())["verdict_rule"]
    table = fitting.read_table(path).select()
    assert rule == fitting.verdict_sweep(table.x, table.y).verdict_rule
    assert "x levels" in rule  # replicated levels are held out whole
