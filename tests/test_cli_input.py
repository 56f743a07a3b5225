"""Data from where it really lives: standard input (``-``) and a workbook's sheet (``--sheet``).

Reference: the same command run on the file's path (the answers must be equal number
for number); Python's ``hashlib.sha256`` for the provenance of piped data.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SENSOR = ROOT / "sample_data" / "sensor_calibration.csv"
CUBIC = ROOT / "sample_data" / "cubic_small_noisy.csv"


def run(*args, stdin_path=None):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    with open(stdin_path or os.devnull, "rb") as fh:
        proc = subprocess.run(
            [sys.executable, "-m", "app.cli", *map(str, args)],
            stdin=fh,
            capture_output=True,
            cwd=ROOT,
            env=env,
            timeout=120,
        )
    return proc.returncode, proc.stdout.decode(), proc.stderr.decode()


NUMBERS = ("coefficients", "standard_errors", "residual_sd", "r_squared", "rmse", "dof", "rows_used", "rows_dropped")


def test_fit_from_standard_input_equals_fit_from_the_path():
    rc, from_path, err = run("fit", CUBIC, "--degree", 2, "--json")
    assert rc == 0, err
    rc, from_stdin, err = run("fit", "-", "--degree", 2, "--json", stdin_path=CUBIC)
    assert rc == 0, err
    a, b = json.loads(from_path), json.loads(from_stdin)
    for key in NUMBERS:
        assert a[key] == b[key], key
    assert b["fitted_from"]["file"] == "standard input"
    assert b["fitted_from"]["sha256"] == a["fitted_from"]["sha256"] == hashlib.sha256(CUBIC.read_bytes()).hexdigest()
    rc, text_path, _ = run("fit", CUBIC, "--degree", 2)
    rc, text_stdin, _ = run("fit", "-", "--degree", 2, stdin_path=CUBIC)
    # the tables are the same; only the file's name in the first lines differs
    assert text_path.split("\n\n", 1)[1] == text_stdin.split("\n\n", 1)[1]


def test_sweep_from_standard_input_equals_sweep_from_the_path():
    rc, from_path, err = run("sweep", SENSOR, "--max-degree", 4, "--json")
    assert rc == 0, err
    rc, from_stdin, err = run("sweep", "-", "--max-degree", 4, "--json", stdin_path=SENSOR)
    assert rc == 0, err
    a, b = json.loads(from_path), json.loads(from_stdin)
    for key in ("degrees", "train_rmse", "test_rmse", "test_rmse_se", "recommended_degree", "rows_used"):
        assert a[key] == b[key], key


def test_predict_input_from_standard_input(tmp_path):
    model = tmp_path / "m.json"
    assert run("fit", SENSOR, "--degree", 2, "--save-model", model)[0] == 0
    xs = tmp_path / "xs.csv"
    xs.write_text("output (mV)\n450\n900\n")
    rc, a, err = run("predict", model, "--input", xs, "--json")
    assert rc == 0, err
    rc, b, err = run("predict", model, "--input", "-", "--json", stdin_path=xs)
    assert rc == 0, err
    assert json.loads(a)["rows"] == json.loads(b)["rows"]


def test_empty_standard_input_is_one_error_line():
    rc, out, err = run("fit", "-", "--degree", 1)
    assert rc == 2 and out == "" and err.startswith("error: ") and len(err.strip().splitlines()) == 1, err


def test_standard_input_over_the_size_limit(tmp_path):
    big = tmp_path / "big.csv"
    big.write_text("x,y\n" + "".join(f"{i},{2 * i}\n" for i in range(120_000)))
    rc, out, err = run("fit", "-", "--degree", 1, "--size-limit-mb", 1, stdin_path=big)
    assert rc == 2 and "size limit" in err and "--size-limit-mb" in err, err


def _capture_reader(monkeypatch):
    import fitting

    seen = []
    real = fitting.read_table

    def spy(source, **kwargs):
        seen.append(dict(kwargs))
        kwargs.pop("sheet", None)
        return real(source, **kwargs)

    monkeypatch.setattr(fitting, "read_table", spy)
    return seen


@pytest.mark.parametrize("given,expected", [(None, None), ("Run 2", "Run 2"), ("1", 1)])
def test_sheet_is_passed_to_the_reader_only_when_given(monkeypatch, capsys, given, expected):
    from app.cli import EXIT_OK, main

    seen = _capture_reader(monkeypatch)
    argv = ["fit", str(SENSOR), "--degree", "1", "--json"] + ([] if given is None else ["--sheet", given])
    assert main(argv) == EXIT_OK
    assert ("sheet" in seen[0]) == (given is not None)
    assert seen[0].get("sheet") == expected
    capsys.readouterr()


def test_sheet_with_an_engine_that_has_no_sheet_parameter(monkeypatch, capsys):
    import fitting
    from app.cli import EXIT_USAGE, main

    def no_sheet(source, *, max_bytes, name=None):
        raise AssertionError("not reached")

    monkeypatch.setattr(fitting, "read_table", no_sheet)
    assert main(["fit", str(SENSOR), "--degree", "1", "--sheet", "0"]) == EXIT_USAGE
    assert "--sheet" in capsys.readouterr().err
