"""The ``degreescope`` command line, run as a separate process.

References named beside each check:
* NIST StRD, Linear Least Squares Regression (Pontius, Norris): certified
  estimates, standard deviations, residual SD and R², read from the copies in
  tests/data/nist_strd (see SOURCES.md there).
* numpy.polynomial.Polynomial.fit (power-basis coefficients via ``convert()``).
* statsmodels OLS / WLS (params, bse, rsquared, scale, get_prediction intervals).
* scikit-learn KFold / ShuffleSplit with PolynomialFeatures + LinearRegression
  (per-fold test RMSE, mean and standard error across folds).
* OWASP "CSV Injection" guidance for the leading characters ``= + - @ TAB CR``.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parent.parent
NIST = ROOT / "tests" / "data" / "nist_strd"
SENSOR = ROOT / "sample_data" / "sensor_calibration.csv"
VAN = ROOT / "sample_data" / "van_fuel.csv"
SCRIPT = ROOT / ".venv" / "bin" / "degreescope"
TIMEOUT = 120


def run(*args, cwd=None, script=False, code=None):
    """Run the CLI in a fresh interpreter; return (returncode, stdout, stderr)."""
    if code is not None:
        cmd = [sys.executable, "-c", code, *map(str, args)]
    elif script:
        cmd = [str(SCRIPT), *map(str, args)]
    else:
        cmd = [sys.executable, "-m", "app.cli", *map(str, args)]
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(cmd, capture_output=True, text=True, cwd=cwd or ROOT, env=env, timeout=TIMEOUT)
    return proc.returncode, proc.stdout, proc.stderr


def run_json(*args):
    rc, out, err = run(*args, "--json")
    assert rc == 0, err
    return json.loads(out), err  # the whole of stdout is one JSON object


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def assert_one_error_line(rc, out, err, code=2):
    assert rc == code, (rc, err)
    lines = err.strip("\n").split("\n")
    assert len(lines) == 1, err
    assert lines[0].startswith("error: "), err
    assert "Traceback" not in err
    assert out == ""


# -- NIST StRD reader (certified values and data from the .dat file) -------------------


def nist(name: str):
    text = (NIST / f"{name}.dat").read_text().splitlines()
    cert = {}
    for line in text[:60]:
        m = re.match(r"\s*B(\d+)\s+(\S+)\s+(\S+)", line)
        if m:
            cert[int(m.group(1))] = (float(m.group(2)), float(m.group(3)))
        m = re.match(r"\s*Standard Deviation\s+(\S+)", line)
        if m:
            cert["sd"] = float(m.group(1))
        m = re.match(r"\s*R-Squared\s+(\S+)", line)
        if m:
            cert["r2"] = float(m.group(1))
    start = next(i for i, line in enumerate(text) if re.match(r"Data:\s+y\s+x\s*$", line)) + 1
    rows = [tuple(map(float, line.split())) for line in text[start:] if line.strip()]
    y = np.array([r[0] for r in rows])
    x = np.array([r[1] for r in rows])
    return x, y, cert


def write_xy_csv(path: Path, x, y, *, names=("x", "y"), extra=None):
    lines = [",".join(names + tuple(extra or {}))]
    for i, (a, b) in enumerate(zip(x, y, strict=False)):
        cells = [repr(float(a)), repr(float(b))] + [repr(float(v[i])) for v in (extra or {}).values()]
        lines.append(",".join(cells))
    path.write_text("\n".join(lines) + "\n")
    return path


def lre(value, certified):
    """Log relative error (number of correct digits), as NIST StRD reports it."""
    if value == certified:
        return 15.0
    return -math.log10(abs(value - certified) / abs(certified))


# -- fit ---------------------------------------------------------------------------------


@pytest.mark.parametrize("name,degree", [("Pontius", 2), ("Norris", 1)])
def test_fit_json_matches_nist_certified_values(tmp_path, name, degree):
    x, y, cert = nist(name)
    csv = write_xy_csv(tmp_path / f"{name}.csv", x, y)
    d, _ = run_json("fit", csv, "--degree", degree)
    for key in (
        "coefficients",
        "standard_errors",
        "residual_sd",
        "r_squared",
        "degree",
        "rows_used",
        "rows_dropped",
        "intake",
        "equation",
        "adjusted_r_squared",
        "rmse",
        "dof",
        "domain",
        "warnings",
    ):
        assert key in d, key
    assert d["degree"] == degree and d["rows_used"] == x.size and d["rows_dropped"] == 0
    assert len(d["coefficients"]) == len(d["standard_errors"]) == degree + 1
    for k in range(degree + 1):  # NIST StRD certified values: at least 9 correct digits
        assert lre(d["coefficients"][k], cert[k][0]) >= 9, (k, d["coefficients"][k], cert[k][0])
        assert lre(d["standard_errors"][k], cert[k][1]) >= 9
    assert lre(d["residual_sd"], cert["sd"]) >= 9
    assert lre(d["r_squared"], cert["r2"]) >= 9


def test_fit_json_matches_numpy_and_statsmodels_on_the_sample():
    import pandas as pd
    import statsmodels.api as sm

    frame = pd.read_csv(SENSOR, comment="#")
    x = frame["output (mV)"].to_numpy()
    y = frame["temperature (°C)"].to_numpy()
    d, _ = run_json("fit", SENSOR, "--degree", 3, "--x", "output (mV)", "--y", "temperature (°C)")
    # numpy.polynomial.Polynomial.fit, converted to the power basis of x
    ref = np.polynomial.Polynomial.fit(x, y, 3).convert().coef
    np.testing.assert_allclose(d["coefficients"], ref, rtol=1e-8)
    # statsmodels OLS on the raw power basis
    ols = sm.OLS(y, np.vander(x, 4, increasing=True)).fit()
    np.testing.assert_allclose(d["coefficients"], ols.params, rtol=1e-7)
    np.testing.assert_allclose(d["standard_errors"], ols.bse, rtol=1e-6)
    assert d["r_squared"] == pytest.approx(ols.rsquared, rel=1e-10)
    assert d["adjusted_r_squared"] == pytest.approx(ols.rsquared_adj, rel=1e-10)
    assert d["residual_sd"] == pytest.approx(math.sqrt(ols.scale), rel=1e-9)
    assert d["dof"] == ols.df_resid == 116
    assert d["domain"] == [pytest.approx(x.min()), pytest.approx(x.max())]
    assert d["x_name"] == "output (mV)" and d["y_name"] == "temperature (°C)"


def test_fit_through_origin_and_weights_match_statsmodels(tmp_path):
    import statsmodels.api as sm

    rng = np.random.default_rng(7)  # invented data
    x = np.linspace(0.5, 10, 40)
    y = 1.5 * x + 0.2 * x**2 + rng.normal(0, 0.3, x.size)
    w = 1.0 / (0.1 + 0.05 * x) ** 2
    csv = write_xy_csv(tmp_path / "w.csv", x, y, extra={"w": w})

    d, _ = run_json("fit", csv, "--degree", 2, "--through-origin")
    ols = sm.OLS(y, np.column_stack([x, x**2])).fit()  # no constant: statsmodels' R² is uncentered
    np.testing.assert_allclose(d["coefficients"], [0.0, *ols.params], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(d["standard_errors"][1:], ols.bse, rtol=1e-7)
    assert d["r_squared"] == pytest.approx(ols.rsquared, rel=1e-10)
    assert d["through_origin"] is True

    d, _ = run_json("fit", csv, "--degree", 2, "--weights", "w")
    wls = sm.WLS(y, np.vander(x, 3, increasing=True), weights=w).fit()
    np.testing.assert_allclose(d["coefficients"], wls.params, rtol=1e-8)
    np.testing.assert_allclose(d["standard_errors"], wls.bse, rtol=1e-7)
    assert d["r_squared"] == pytest.approx(wls.rsquared, rel=1e-9)


def test_fit_table_output_is_readable():
    rc, out, err = run("fit", SENSOR, "--degree", 2)
    assert rc == 0, err
    assert "term" in out and "coefficient" in out and "standard error" in out and "R²" in out
    assert "Rows used 120, dropped 0" in out
    assert not out.lstrip().startswith("{")


def test_json_nan_is_null_and_stdout_is_only_json(tmp_path):
    # degree 3 through 4 points: no residual degrees of freedom, so residual SD is undefined
    csv = write_xy_csv(tmp_path / "four.csv", [0, 1, 2, 3], [1, 0, 5, 2])
    rc, out, err = run("fit", csv, "--degree", 3, "--json")
    assert rc == 0, err
    assert "NaN" not in out and "Infinity" not in out
    d = json.loads(out)
    assert d["residual_sd"] is None and d["dof"] == 0
    assert d["warnings"] and err.startswith("warning: ")


# -- sweep -------------------------------------------------------------------------------


def _sklearn_cv_rmse(x, y, degrees, splitter):
    from sklearn.linear_model import LinearRegression
    from sklearn.model_selection import cross_val_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import PolynomialFeatures, StandardScaler

    out = []
    for d in degrees:
        model = make_pipeline(StandardScaler(), PolynomialFeatures(d), LinearRegression())
        scores = -cross_val_score(model, x[:, None], y, cv=splitter, scoring="neg_root_mean_squared_error")
        out.append(scores)
    return np.array(out)


def test_sweep_json_matches_scikit_learn_kfold():
    import pandas as pd
    from sklearn.model_selection import KFold

    frame = pd.read_csv(VAN, comment="#")
    x, y = frame.iloc[:, 0].to_numpy(), frame.iloc[:, 1].to_numpy()
    d, _ = run_json("sweep", VAN, "--max-degree", 6, "--folds", 5, "--seed", 3)
    for key in (
        "rows_used",
        "rows_dropped",
        "degrees",
        "train_rmse",
        "test_rmse",
        "test_rmse_se",
        "recommended_degree",
        "recommendation_rule",
        "overfitting_from",
        "recommendation",
        "warnings",
        "scheme",
    ):
        assert key in d, key
    assert d["degrees"] == list(range(7)) and d["rows_used"] == 200 and d["rows_dropped"] == 0
    folds = _sklearn_cv_rmse(x, y, range(7), KFold(5, shuffle=True, random_state=3))
    mean = folds.mean(axis=1)
    se = folds.std(axis=1, ddof=1) / math.sqrt(5)
    np.testing.assert_allclose(d["test_rmse"], mean, rtol=1e-7)
    np.testing.assert_allclose(d["test_rmse_se"], se, rtol=1e-6)
    # one-standard-error rule (common practice, no source): smallest degree within 1 SE of the minimum
    best = int(np.argmin(mean))
    assert d["recommended_degree"] == int(np.nonzero(mean <= mean[best] + se[best])[0][0])


def test_sweep_holdout_has_no_standard_error():
    import pandas as pd
    from sklearn.model_selection import ShuffleSplit

    frame = pd.read_csv(VAN, comment="#")
    x, y = frame.iloc[:, 0].to_numpy(), frame.iloc[:, 1].to_numpy()
    d, _ = run_json("sweep", VAN, "--max-degree", 4, "--holdout", 0.25, "--seed", 1)
    assert d["test_rmse_se"] is None
    ref = _sklearn_cv_rmse(x, y, range(5), ShuffleSplit(1, test_size=50, random_state=1))[:, 0]
    np.testing.assert_allclose(d["test_rmse"], ref, rtol=1e-7)
    assert d["recommended_degree"] == int(np.argmin(ref))


def test_sweep_grouped_folds_match_scikit_learn_leave_one_group_out():
    import pandas as pd
    from sklearn.model_selection import LeaveOneGroupOut

    frame = pd.read_csv(SENSOR, comment="#")
    x, y, g = (frame[c].to_numpy() for c in ("output (mV)", "temperature (°C)", "batch"))
    d, _ = run_json("sweep", SENSOR, "--group", "batch", "--max-degree", 4)
    assert d["n_splits"] == 4
    ref = _sklearn_cv_rmse(x, y, range(5), list(LeaveOneGroupOut().split(x[:, None], y, g)))
    np.testing.assert_allclose(d["test_rmse"], ref.mean(axis=1), rtol=1e-6)


def test_sweep_table_output():
    rc, out, err = run("sweep", SENSOR, "--max-degree", 5)
    assert rc == 0, err
    assert "test RMSE" in out and "Recommended degree:" in out and "recommended" in out


# -- predict -----------------------------------------------------------------------------


def test_save_model_then_predict_round_trip_matches_statsmodels(tmp_path):
    import pandas as pd
    import statsmodels.api as sm

    model = tmp_path / "model.json"
    rc, out, err = run("fit", SENSOR, "--degree", 3, "--save-model", model)
    assert rc == 0, err
    saved = json.loads(model.read_text())
    assert saved["format"] == "degreescope.polynomial-model" and saved["fitted_from"]["sha256"] == sha256(SENSOR)
    assert [p.name for p in tmp_path.iterdir()] == ["model.json"]  # no temporary file left behind

    at = [100.0, 900.0, 1700.0, 2500.0]  # the last one is beyond the fitted x range
    d, err = run_json("predict", model, "--at", *at, "--level", 0.9)
    rows = d["rows"]
    assert [r["x"] for r in rows] == at
    assert [r["outside_range"] for r in rows] == [False, False, False, True]
    assert "outside the fitted x range" in err

    frame = pd.read_csv(SENSOR, comment="#")
    x, y = frame["output (mV)"].to_numpy(), frame["temperature (°C)"].to_numpy()
    ols = sm.OLS(y, np.vander(x, 4, increasing=True)).fit()
    pred = ols.get_prediction(np.vander(np.array(at), 4, increasing=True)).summary_frame(alpha=0.1)
    got = pd.DataFrame(rows)
    # statsmodels works on raw powers of x (condition number ~1e10 here), so agreement is to ~8 digits
    np.testing.assert_allclose(got["prediction"], pred["mean"], rtol=1e-8)
    np.testing.assert_allclose(got["confidence_lower"], pred["mean_ci_lower"], rtol=1e-7)
    np.testing.assert_allclose(got["confidence_upper"], pred["mean_ci_upper"], rtol=1e-7)
    np.testing.assert_allclose(got["prediction_lower"], pred["obs_ci_lower"], rtol=1e-7)
    np.testing.assert_allclose(got["prediction_upper"], pred["obs_ci_upper"], rtol=1e-7)

    rc, out, err = run("predict", model, "--at", 2500)
    assert rc == 0 and "OUTSIDE" in out


def test_predict_input_file_to_csv_is_neutralised_and_input_untouched(tmp_path):
    model = tmp_path / "m.json"
    assert run("fit", SENSOR, "--degree", 1, "--save-model", model)[0] == 0
    src = tmp_path / "at.csv"
    # a column name that a spreadsheet would run as a formula (OWASP CSV injection)
    src.write_text('=HYPERLINK("http://example.invalid"),run,note\n100,1,a\n-50,2,b\n,3,c\n900,4,d\n')
    before = sha256(src)
    out_csv = tmp_path / "pred.csv"
    rc, out, err = run(
        "predict", model, "--input", src, "--x", '=HYPERLINK("http://example.invalid")', "--output", out_csv
    )
    assert rc == 0, err
    assert sha256(src) == before
    lines = out_csv.read_text().splitlines()
    assert lines[0].startswith("\"'=HYPERLINK(") or lines[0].startswith("'=HYPERLINK(")
    body = [line.split(",") for line in lines[1:]]
    assert [float(r[0]) for r in body] == [100.0, -50.0, 900.0]  # numbers stay numbers, the blank row is left out
    assert [r[-1] for r in body] == ["no", "yes", "no"]
    assert "1 rows" in err and "left out" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["at.csv", "m.json", "pred.csv"]


def test_predict_input_may_be_a_single_column_of_x_values(tmp_path):
    # A plain list of x values, with a header, a comment and a missing marker; and one in UTF-16 with a BOM.
    model = tmp_path / "m.json"
    assert run("fit", SENSOR, "--degree", 2, "--save-model", model)[0] == 0
    fitted = json.loads(model.read_text())
    plain = tmp_path / "xs.csv"
    plain.write_text("# x values to convert\noutput (mV)\n450\nNA\n900\n1500\n")
    wide = tmp_path / "xs_utf16.csv"
    wide.write_bytes("Ausgang (µV)\r\n450.5\r\n−900\r\n".encode("utf-16"))
    got, _ = run_json("predict", model, "--input", plain)
    rows = got["rows"]
    xs = [r["x"] for r in rows]
    assert xs == [450.0, 900.0, 1500.0]  # the NA row is left out
    # numpy's Polynomial evaluation of the saved power-basis coefficients as the reference
    ref = np.polynomial.Polynomial(fitted["coefficients"])(np.array(xs))
    assert np.allclose([r["prediction"] for r in rows], ref, rtol=1e-9)
    got, _ = run_json("predict", model, "--input", wide)
    rows = got["rows"]
    assert [r["x"] for r in rows] == [450.5, -900.0]  # the unicode minus is a minus


def test_neutralise_cell_rules():
    from app._atomic import neutralise_cell

    for bad in ("=1+1", "+1", "-1+cmd", "@SUM(A1)", "\tx", "\rx"):
        assert neutralise_cell(bad) == "'" + bad  # OWASP CSV injection guidance
    for fine in ("abc", "1.5", " =x", ""):
        assert neutralise_cell(fine) == fine
    assert neutralise_cell(-1.5) == -1.5 and neutralise_cell(None) is None


# -- inputs are never modified -----------------------------------------------------------


def test_input_files_are_not_modified(tmp_path):
    copy = tmp_path / "sensor.csv"
    shutil.copy(SENSOR, copy)
    before = sha256(copy)
    assert run("fit", copy, "--degree", 2, "--json")[0] == 0
    assert run("sweep", copy, "--max-degree", 3, "--json")[0] == 0
    assert run("fit", copy, "--degree", 200)[0] == 2
    assert sha256(copy) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sensor.csv"]


# -- atomic writes -----------------------------------------------------------------------

FAILING_REPLACE = (
    "import os, sys\n"
    "def boom(*a, **k):\n"
    "    raise OSError(28, 'No space left on device')\n"
    "os.replace = boom\n"
    "from app.cli import main\n"
    "sys.exit(main(sys.argv[1:]))\n"
)


def test_failed_write_keeps_the_existing_file_and_leaves_no_temporary(tmp_path):
    model = tmp_path / "model.json"
    model.write_text("previous contents\n")
    rc, out, err = run("fit", SENSOR, "--degree", 2, "--save-model", model, code=FAILING_REPLACE)
    assert_one_error_line(rc, out, err)
    assert "No space left on device" in err
    assert model.read_text() == "previous contents\n"
    assert [p.name for p in tmp_path.iterdir()] == ["model.json"]


def test_atomic_writer_in_process(tmp_path, monkeypatch):
    from app import _atomic

    target = tmp_path / "out.csv"
    _atomic.write_csv_atomic(target, ["a", "=b"], [[1.0, "-x"], [-2.5, "ok"]])
    assert target.read_text() == "a,'=b\n1.0,'-x\n-2.5,ok\n"

    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(_atomic.os, "fsync", interrupted)
    with pytest.raises(KeyboardInterrupt):
        _atomic.write_text_atomic(target, "new")
    assert target.read_text() == "a,'=b\n1.0,'-x\n-2.5,ok\n"
    assert [p.name for p in tmp_path.iterdir()] == ["out.csv"]


# -- errors ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "args",
    [
        ("fit", "no/such/file.csv", "--degree", "1"),
        ("fit", str(SENSOR)),  # --degree missing
        ("fit", str(SENSOR), "--degree", "two"),
        ("fit", str(SENSOR), "--degree", "1", "--x", "no such column"),
        ("fit", str(SENSOR), "--degree", "200"),
        ("fit", str(ROOT / "sample_data"), "--degree", "1"),  # a folder
        ("sweep", str(SENSOR), "--folds", "5", "--holdout", "0.2"),
        ("sweep", str(SENSOR), "--holdout", "1.5"),
        ("sweep", str(SENSOR), "--ordered"),
        ("sweep", str(SENSOR), "--folds", "500"),
        ("predict", str(SENSOR), "--at", "1"),  # not a model file
        ("predict", "missing.json", "--at", "1"),
        ("bogus-command",),
        ("fit", str(SENSOR), "--degree", "1", "--no-such-option"),
        (),
    ],
)
def test_bad_input_exits_2_with_one_error_line(args):
    rc, out, err = run(*args)
    assert_one_error_line(rc, out, err)


def test_size_limit(tmp_path):
    big = write_xy_csv(tmp_path / "big.csv", np.arange(100000.0), np.arange(100000.0) * 2)
    rc, out, err = run("fit", big, "--degree", 1, "--size-limit-mb", 1)
    assert_one_error_line(rc, out, err)
    rc, out, err = run("fit", "--help")
    assert "(default: 512)" in " ".join(out.split())


def test_binary_and_model_garbage(tmp_path):
    junk = tmp_path / "junk.csv"
    junk.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    assert_one_error_line(*run("fit", junk, "--degree", 1))
    bad_model = tmp_path / "bad.json"
    bad_model.write_text(json.dumps({"format": "degreescope.polynomial-model", "degree": 2}))
    assert_one_error_line(*run("predict", bad_model, "--at", "1"))


INTERNAL_ERROR = (
    "import sys, fitting\n"
    "def boom(*a, **k):\n"
    "    raise RuntimeError('simulated defect')\n"
    "fitting.fit_polynomial = boom\n"
    "from app.cli import main\n"
    "sys.exit(main(sys.argv[1:]))\n"
)


def test_internal_error_exits_1_with_debug_hint():
    rc, out, err = run("fit", SENSOR, "--degree", 1, code=INTERNAL_ERROR)
    assert_one_error_line(rc, out, err, code=1)
    assert "--debug" in err and "simulated defect" in err
    rc, out, err = run("--debug", "fit", SENSOR, "--degree", 1, code=INTERNAL_ERROR)
    assert rc == 1 and "Traceback" in err and "RuntimeError: simulated defect" in err
    rc, out, err = run("fit", SENSOR, "--degree", 1, "--debug", code=INTERNAL_ERROR)
    assert rc == 1 and "Traceback" in err


# -- streaming hook ----------------------------------------------------------------------


def test_sweep_of_a_parquet_file_goes_through_the_streaming_engine(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(11)  # invented data
    x = rng.uniform(-2, 2, 3000)
    y = 1 - x + 0.5 * x**2 + rng.normal(0, 0.1, x.size)
    pq.write_table(pa.table({"x": x, "y": y}), tmp_path / "data.parquet")
    rc, out, err = run("sweep", tmp_path / "data.parquet", "--max-degree", 5, "--json")
    assert rc == 0, err
    d = json.loads(out)
    assert d["rows_used"] == 3000 and d["intake"]["streamed"]["format"]
    assert d["recommended_degree"] == 2
    assert err == ""  # no progress line: stderr is not a terminal here
    assert_one_error_line(*run("sweep", tmp_path / "data.parquet", "--group", "g"))


# -- process boundaries --------------------------------------------------------------------

NO_DASH = (
    "import sys\n"
    "from app.cli import main\n"
    "code = main(sys.argv[1:])\n"
    "loaded = sorted(m for m in sys.modules if m.startswith(('dash', 'plotly')))\n"
    "assert 'dash' not in sys.modules and 'plotly' not in sys.modules, loaded\n"
    "sys.exit(code)\n"
)


def test_fit_sweep_predict_do_not_import_dash(tmp_path):
    rc, out, err = run("fit", SENSOR, "--degree", 1, "--json", code=NO_DASH)
    assert rc == 0, err
    rc, out, err = run("sweep", SENSOR, "--max-degree", 2, "--json", code=NO_DASH)
    assert rc == 0, err


@pytest.mark.skipif(not SCRIPT.exists(), reason="the console script is not installed in .venv")
def test_installed_console_script(tmp_path):
    rc, out, err = run("fit", SENSOR, "--degree", 1, "--json", script=True)
    assert rc == 0, err
    assert json.loads(out)["degree"] == 1
    assert_one_error_line(*run("fit", "nope.csv", "--degree", "1", script=True))


# -- serve -------------------------------------------------------------------------------


def _serve_process(*extra):
    env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1")
    return subprocess.Popen(
        [sys.executable, "-m", "app.cli", "serve", "--port", "0", "--threads", "2", *map(str, extra)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        cwd=ROOT,
        env=env,
    )


def _first_line(stream, proc, limit=60.0):
    import select
    import time

    end = time.monotonic() + limit
    while time.monotonic() < end:
        ready, _, _ = select.select([stream], [], [], 0.5)
        if ready:
            return stream.readline()
        if proc.poll() is not None:
            return ""
    return ""


def test_serve_prints_a_loopback_url_and_guards_it():
    import http.client
    from urllib.parse import urlparse

    proc = _serve_process(SENSOR)
    try:
        line = _first_line(proc.stdout, proc)
        assert line.startswith("degreescope dashboard: http://127.0.0.1:"), line
        url = urlparse(line.split(": ", 1)[1].strip())
        assert url.hostname == "127.0.0.1" and "token" not in (url.query or "")
        conn = http.client.HTTPConnection("127.0.0.1", url.port, timeout=20)
        conn.request("GET", "/_dash-layout")
        resp = conn.getresponse()
        assert resp.status == 200 and b"sensor_calibration.csv" in resp.read()
        conn.request("GET", "/_dash-layout", headers={"Host": "rebind.example:%d" % url.port})
        resp = conn.getresponse()
        resp.read()
        assert resp.status == 421
        conn.close()
    finally:
        proc.terminate()
        proc.wait(timeout=20)
        proc.stdout.close()
        proc.stderr.close()


def test_serve_bad_file_and_bad_port_exit_2():
    assert_one_error_line(*run("serve", "no-such-data.csv"))
    assert_one_error_line(*run("serve", "--port", "70000"))
    assert_one_error_line(*run("serve", "--threads", "0"))


SMALL_STREAM_THRESHOLD = (
    "import sys\n"
    "import app.cli as cli\n"
    "import app.cli.sweep\n"
    "app.cli.sweep.STREAM_ABOVE_BYTES = 1000  # stands in for 64 MiB, so the test needs no huge file\n"
    "sys.exit(cli.main(sys.argv[1:]))\n"
)


def test_large_csv_is_swept_in_chunks_with_the_same_answer():
    rc, out, err = run("sweep", VAN, "--max-degree", 4, "--json", code=SMALL_STREAM_THRESHOLD)
    assert rc == 0, err
    streamed = json.loads(out)
    assert streamed["intake"]["streamed"]["rows_used"] == 200 == streamed["rows_used"]
    in_memory, _ = run_json("sweep", VAN, "--max-degree", 4)
    assert "streamed" not in in_memory["intake"]
    # different fold assignment (row hash vs KFold shuffle), same data: both pick the same degree here
    assert streamed["recommended_degree"] == in_memory["recommended_degree"]
    assert_one_error_line(*run("sweep", VAN, "--group", "batch", code=SMALL_STREAM_THRESHOLD))


def test_progress_line_only_on_a_terminal(tmp_path):
    import pty
    import select

    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(5)  # invented data
    x = rng.uniform(0, 1, 5000)
    pq.write_table(pa.table({"x": x, "y": 3 * x + rng.normal(0, 0.1, x.size)}), tmp_path / "p.parquet")
    master, slave = pty.openpty()
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen(
        [sys.executable, "-m", "app.cli", "sweep", str(tmp_path / "p.parquet"), "--max-degree", "2", "--json"],
        stdout=subprocess.PIPE,
        stderr=slave,
        cwd=ROOT,
        env=env,
    )
    os.close(slave)
    out, _ = proc.communicate(timeout=TIMEOUT)
    seen = b""
    while select.select([master], [], [], 0.2)[0]:
        try:
            chunk = os.read(master, 4096)
        except OSError:
            break
        if not chunk:
            break
        seen += chunk
    os.close(master)
    assert proc.returncode == 0, seen
    assert json.loads(out)["rows_used"] == 5000  # stdout stays pure JSON
    assert b"read " in seen and b"rows" in seen


# -- hostile inputs found by trying the command by hand ---------------------------------------


def test_fifo_is_refused_instead_of_blocking(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)  # opening it for reading would wait for a writer for ever
    for args in (("fit", fifo, "--degree", 1), ("sweep", fifo), ("predict", fifo, "--at", 1)):
        rc, out, err = run(*args)
        assert_one_error_line(rc, out, err)
        assert "not a regular file" in err


def test_writing_onto_an_input_is_refused_and_the_input_kept(tmp_path):
    data = tmp_path / "data.csv"
    shutil.copy(SENSOR, data)
    before = sha256(data)
    assert_one_error_line(*run("fit", data, "--degree", 2, "--save-model", data))
    assert sha256(data) == before
    model = tmp_path / "m.json"
    assert run("fit", data, "--degree", 2, "--save-model", model)[0] == 0
    model_sha = sha256(model)
    assert_one_error_line(*run("predict", model, "--at", 1, "--output", model))
    assert_one_error_line(*run("predict", model, "--input", data, "--output", data))
    assert sha256(model) == model_sha and sha256(data) == before


@pytest.mark.parametrize("seed", ["-5", str(2**32), "99999999999999999999999"])
def test_seed_out_of_range_exits_2(seed):
    rc, out, err = run("sweep", SENSOR, "--max-degree", 3, "--seed", seed)
    assert_one_error_line(rc, out, err)
    assert "from 0 to 4294967295" in err


def test_absurd_size_limit_exits_2():
    assert_one_error_line(*run("fit", SENSOR, "--degree", 1, "--size-limit-mb", "99999999999999999"))


def test_sparse_file_over_the_limit_is_refused_at_once(tmp_path):
    big = tmp_path / "sparse.csv"
    with open(big, "wb") as fh:
        fh.truncate(2 * 1024**3)  # 2 GiB of NUL bytes, sparse on disk
    rc, out, err = run("fit", big, "--degree", 1)
    assert_one_error_line(rc, out, err)
    assert "--size-limit-mb 2048" in err  # the command line's option, not the engine's parameter name
    rc, out, err = run("sweep", big)  # over 64 MiB: the chunked path, which used to scan 2 GiB for a header
    assert_one_error_line(rc, out, err)
    assert "NUL bytes" in err


def _model_variants(good: dict) -> dict:
    sf = good["stable_form"]
    return {
        "huge integer": {**good, "residual_sd": 10**400},
        "name not text": {**good, "x_name": 12},
        "name a list": {**good, "x_name": ["x"]},
        "warnings a string": {**good, "warnings": "oops"},
        "basis longer than degree": {**good, "stable_form": {**sf, "coefficients": [1.0] * 200}},
        "zero scale": {**good, "stable_form": {**sf, "scale": 0}},
        "reversed domain": {**good, "domain": [good["domain"][1], good["domain"][0]]},
        "negative residual SD": {**good, "residual_sd": -1.0},
        "negative dof": {**good, "dof": -3},
    }


def test_malformed_model_files_exit_2(tmp_path):
    model = tmp_path / "m.json"
    assert run("fit", SENSOR, "--degree", 2, "--save-model", model)[0] == 0
    good = json.loads(model.read_text())
    for what, variant in _model_variants(good).items():
        bad = tmp_path / "bad.json"
        bad.write_text(json.dumps(variant))
        rc, out, err = run("predict", bad, "--at", 1)
        assert rc == 2, (what, err)
        assert_one_error_line(rc, out, err)
    deep = tmp_path / "deep.json"
    deep.write_text("[" * 100000 + "]" * 100000)
    assert_one_error_line(*run("predict", deep, "--at", 1))
    bom = tmp_path / "bom.json"
    bom.write_text("\ufeff" + model.read_text(), encoding="utf-8")  # as some editors save it
    rc, out, err = run("predict", bom, "--at", 1)
    assert rc == 0, err


@pytest.mark.parametrize("scale", ["1e300", "1e-300"])
def test_y_magnitudes_at_the_edges_of_double_precision_fit_like_any_other(tmp_path, scale):
    # y = x**2 * scale, exactly; the engine scales by powers of two inside and undoes it exactly
    # (reference: the exact quadratic the file was written from)
    path = tmp_path / "extreme.csv"
    path.write_text("x,y\n" + "".join(f"{i},{i * i}e{scale[2:]}\n" for i in range(1, 13)))
    rc, out, err = run("fit", path, "--degree", 2, "--json")
    assert rc == 0, err
    coef = json.loads(out)["coefficients"]
    big = float(scale)
    assert coef[2] == pytest.approx(big, rel=1e-12)
    assert abs(coef[0]) <= 1e-9 * big and abs(coef[1]) <= 1e-9 * big
    rc, out, err = run("sweep", path, "--json")
    assert rc == 0, err
