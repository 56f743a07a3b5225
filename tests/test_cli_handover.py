"""What the command line shows and hands over is right: one regression test per defect found.

References named beside each check:
* Python's ``importlib.metadata`` (the installed version) and ``difflib`` (the close option).
* statsmodels WLS (weighted fit: ``fittedvalues``, from which the unweighted RMSE in y's units).
* numpy.polyfit on exact integer data (the residuals are rounding noise, so RMSE and R² read 0 or 1).
* The intake's own drop report in the ``--json`` output (every reason and its line numbers).
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parent.parent
SENSOR = ROOT / "sample_data" / "sensor_calibration.csv"


def run(*args):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "app.cli", *map(str, args)],
        capture_output=True,
        text=True,
        cwd=ROOT,
        env=env,
        timeout=120,
    )
    return proc.returncode, proc.stdout, proc.stderr


def one_error(rc, out, err):
    assert rc == 2, (rc, err)
    assert out == "" and err.startswith("error: ") and len(err.strip().splitlines()) == 1, err
    return err


def stat(out: str, label_start: str) -> str:
    """The value cell of the statistics row whose label begins with ``label_start``."""
    for line in out.splitlines():
        if line.startswith(label_start):
            return line.split("  ")[-1].strip()
    raise AssertionError(f"no row {label_start!r} in\n{out}")


def test_version():
    rc, out, err = run("--version")
    assert rc == 0, err
    try:
        expected = metadata.version("degreescope")
    except metadata.PackageNotFoundError:
        expected = "0+unknown"
    assert out.strip() == f"degreescope {expected}"


def test_misspelt_option_names_the_close_one():
    err = one_error(*run("fit", SENSOR, "--degee", "2"))
    assert "'--degee'" in err and "did you mean --degree?" in err
    err = one_error(*run("sweep", SENSOR, "--hold-out", "0.2"))
    assert "did you mean --holdout?" in err


@pytest.mark.parametrize(
    "args,words",
    [
        (("fit", SENSOR, "--degree", 1, "--x", "batch", "--y", "batch"), "--x and --y both name"),
        (("sweep", SENSOR, "--x", "batch", "--y", "batch"), "--x and --y both name"),
        (("sweep", SENSOR, "--group", "temperature (°C)"), "--group names the y column"),
        (("sweep", SENSOR, "--x", "batch", "--group", "batch"), "--group names the x column"),
        (("sweep", SENSOR, "--y", "batch", "--group", "batch"), "--group names the y column"),
    ],
)
def test_same_column_twice_is_refused(args, words):
    err = one_error(*run(*args))
    # the command line's own words, or the engine's (Table.select refuses the same cases first)
    role = "y" if "y column" in words else "x" if "x column" in words else None
    engine_words = f"is also {role}" if role else "are the same column"
    assert words in err or engine_words in err, err


def test_folds_with_group_is_refused_in_words():
    err = one_error(*run("sweep", SENSOR, "--group", "batch", "--folds", 5))
    assert "--folds" in err and "--group" in err


BAD_ROWS = (
    "# invented readings\n"
    "Output [V],Temp (°C),w\n"
    "1,2.1,1\n"
    "2,n/a,1\n"  # line 4: y missing
    "3,6.2,2\n"
    ",8.1,1\n"  # line 6: x missing
    "5,10.3,1\n"
    "6,n/a,1\n"  # line 8: y missing
    "7,14.2,1\n"
    "8,15.9,1\n"
)


def test_text_output_lists_every_dropped_reason_with_its_lines(tmp_path):
    path = tmp_path / "bad_rows.csv"
    path.write_text(BAD_ROWS, encoding="utf-8")
    rc, out, err = run("fit", path, "--degree", 1, "--json")
    assert rc == 0, err
    dropped = json.loads(out)["intake"]["selection"]["dropped"]
    assert dropped  # the engine reports reasons; each must reach the text output
    for command in (("fit", path, "--degree", 1), ("sweep", path, "--max-degree", 1, "--folds", 3)):
        rc, out, err = run(*command)
        assert rc == 0, err
        for reason, info in dropped.items():
            line = next((s for s in out.splitlines() if reason in s), None)
            assert line is not None, (reason, out)
            for n in info["first_lines"]:
                assert str(n) in line, (reason, n, line)
    assert {tuple(v["first_lines"]) for v in dropped.values()} == {(4, 8), (6,)}


def test_weighted_fit_labels_both_rmses(tmp_path):
    import statsmodels.api as sm

    rng = np.random.default_rng(21)  # invented data
    x = np.linspace(1, 20, 40)
    y = 3 + 0.8 * x + rng.normal(0, 0.05 * x)
    w = 1 / (0.05 * x) ** 2
    path = tmp_path / "w.csv"
    path.write_text(
        "x,y,w\n" + "".join(f"{float(a)!r},{float(b)!r},{float(c)!r}\n" for a, b, c in zip(x, y, w, strict=True))
    )
    rc, out, err = run("fit", path, "--degree", 1, "--weights", "w")
    assert rc == 0, err
    wls = sm.WLS(y, np.vander(x, 2, increasing=True), weights=w).fit()
    plain = math.sqrt(np.mean((y - wls.fittedvalues) ** 2))
    assert float(stat(out, "RMSE, unweighted")) == pytest.approx(plain, rel=1e-7)
    weighted = math.sqrt(np.sum(w * (y - wls.fittedvalues) ** 2) / np.sum(w))
    assert float(stat(out, "weighted RMSE")) == pytest.approx(weighted, rel=1e-7)
    assert float(stat(out, "residual SD, weighted")) == pytest.approx(math.sqrt(wls.scale), rel=1e-7)
    rc, out, err = run("fit", path, "--degree", 1)
    assert "weighted" not in out and stat(out, "RMSE (divides by n")


def test_exact_data_reads_zero_not_rounding_noise(tmp_path):
    # numpy.polyfit reference: exact integer data on y = 1 + 2x + 3x², residuals are rounding noise
    x = np.arange(1.0, 21.0)
    y = 1 + 2 * x + 3 * x**2
    path = tmp_path / "exact.csv"
    path.write_text("x,y\n" + "".join(f"{int(a)},{int(b)}\n" for a, b in zip(x, y, strict=True)))
    rc, out, err = run("fit", path, "--degree", 2)
    assert rc == 0, err
    assert stat(out, "RMSE") == "0" and stat(out, "residual SD") == "0"
    assert stat(out, "R²") == "1"
    rc, out, err = run("fit", path, "--degree", 0)  # a constant: R² is 0 up to rounding
    assert rc == 0, err
    assert stat(out, "R²") == "0"
    assert "e-" not in stat(out, "R²")


def test_r2_close_to_one_is_never_printed_as_one(tmp_path):
    from app._format import fmt_r2

    rc, out, err = run("fit", SENSOR, "--degree", 3, "--json")
    r2 = json.loads(out)["r_squared"]
    assert 0.99999 < r2 < 1
    rc, out, err = run("fit", SENSOR, "--degree", 3)
    assert stat(out, "R²") == fmt_r2(r2, 6) != "1"
    assert float(stat(out, "R²")) == pytest.approx(r2, abs=1e-8)


def test_constant_term_is_named_constant():
    from app.handover import term_name

    rc, out, err = run("fit", SENSOR, "--degree", 2)
    assert rc == 0, err
    lines = out.splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("term ")) + 2
    end = lines.index("", start)
    assert [line.split()[0] for line in lines[start:end]] == ["constant", "x", "x^2"]
    assert term_name(0) == "constant"


def test_headers_never_repeat_units(tmp_path):
    path = tmp_path / "units.csv"
    path.write_text("Output [V],Temp (°C)\n1,2\n2,4.1\n3,5.9\n4,8.2\n5,9.9\n")
    rc, out, err = run("fit", path, "--degree", 1)
    assert rc == 0, err
    title = out.splitlines()[0]
    assert "Temp (°C) against Output [V]," in title
    assert "(V)" not in out and "(°C) (°C)" not in out
    rc, out, err = run("sweep", path, "--max-degree", 1, "--folds", 2)
    assert rc == 0, err
    assert "Output [V] (V)" not in out and "Temp (°C) against Output [V]" in out


def test_statistics_of_the_reported_defect_read_zero_and_never_one():
    # The values seen on exact data (R² 5.42e-20 for a constant, RMSE 3.1e-38) and an R² just below 1.
    from types import SimpleNamespace

    from app.cli.fit import statistic_rows

    sel = SimpleNamespace(y=np.array([1.0, 5.0, 9.0]), y_unit="V")
    fit = SimpleNamespace(
        weighted=False,
        through_origin=False,
        residual_sd=4.2e-38,
        rmse=3.1e-38,
        r_squared=5.42e-20,
        adjusted_r_squared=0.9999975,
        dof=1,
        domain=(0.0, 2.0),
    )
    rows = dict(statistic_rows(fit, sel, 3.1e-38))
    assert rows["RMSE (divides by n; in V)"] == "0" and rows["residual SD (divides by n − p; in V)"] == "0"
    assert rows["R²"] == "0"
    assert rows["adjusted R²"] == "0.9999975"
