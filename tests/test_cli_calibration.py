"""Calibration on the command line: readings read back through a saved model, weighted fits, back-calculation.

References named beside each check:
* NIST StRD "Pontius" (tests/data/nist_strd/Pontius.dat): the 40 load-cell pairs of the
  NIST/SEMATECH e-Handbook's load-cell case study (deflection y against load x). The
  readings read back here are our own choices, not values printed in the e-Handbook.
* The calibration interval of the NIST/SEMATECH e-Handbook, section 4.5.2.1 (the x whose
  prediction interval for a new reading contains y0), recomputed from statsmodels OLS / WLS
  (covariance, scale) with scipy.optimize.brentq for x0 and both ends.
* The delta-method standard uncertainty (EURACHEM/CITAC guide, appendix E.3, remembered):
  evaluated with statsmodels' covariance.
* numpy.roots on the model file's power-basis coefficients (the roots of a quadratic that turns).
* The back-calculation rule of the FDA 2018 Bioanalytical Method Validation guidance and ICH M10
  (±15 %, ±20 % at the lowest level, 75 % of standards and 6 levels), recomputed by hand here.
* The weighting comparison criterion (Almeida, Castel-Branco and Falcão, J. Chromatogr. B 774
  (2002) 215; journal details from memory), recomputed with statsmodels WLS and brentq.
* The hump and the weighted line are invented data.
"""

from __future__ import annotations

import csv
import io
import json
import math

import nist
import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.optimize import brentq

from app.cli import _readback, main

SCALE = 1e6  # statsmodels works in load / 1e6 so that its design is well conditioned


def cli(capsys, *args):
    """Run ``degreescope`` in this process; return (status, stdout, stderr)."""
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def cli_json(capsys, *args):
    code, out, err = cli(capsys, *args, "--json")
    assert code == 0, err
    return json.loads(out), err


def one_error(code, out, err):
    assert code == 2, (code, err)
    assert out == "" and err.startswith("error: ") and len(err.strip().splitlines()) == 1, err
    return err


def write_csv(path, header, rows):
    path.write_text(",".join(header) + "\n" + "".join(",".join(repr(float(v)) for v in r) + "\n" for r in rows))
    return path


class Reference:
    """Inverse prediction recomputed from a statsmodels result in the power basis of u = x / scale."""

    def __init__(self, res, scale=1.0, weight=lambda u: 1.0):
        self.b = np.asarray(res.params)
        self.cov = np.asarray(res.cov_params())
        self.s2 = float(res.scale)
        self.df = res.df_resid
        self.scale = scale
        self.weight = weight

    def f(self, u):
        return float(u ** np.arange(self.b.size) @ self.b)

    def sp(self, u, k):
        g = u ** np.arange(self.b.size)
        return math.sqrt(self.s2 / (k * self.weight(u)) + float(g @ self.cov @ g))

    def slope(self, u):
        return float(sum(j * self.b[j] * u ** (j - 1) for j in range(1, self.b.size)))

    def read(self, y0, k, lo, hi, level=0.95):
        """x0, lower end, upper end, u(x0) for a rising curve (e-Handbook 4.5.2.1; EURACHEM/CITAC E.3)."""
        t = stats.t.ppf(0.5 + level / 2, self.df)
        lo, hi = lo / self.scale, hi / self.scale
        x0 = brentq(lambda u: self.f(u) - y0, lo, hi, xtol=1e-15)
        xl = brentq(lambda u: self.f(u) + t * self.sp(u, k) - y0, lo, x0, xtol=1e-15)
        xu = brentq(lambda u: self.f(u) - t * self.sp(u, k) - y0, x0, hi, xtol=1e-15)
        u = self.sp(x0, k) / abs(self.slope(x0))
        return tuple(v * self.scale for v in (x0, xl, xu, u))


@pytest.fixture(scope="module")
def pontius_model(tmp_path_factory):
    d = nist.load("Pontius")
    folder = tmp_path_factory.mktemp("pontius")
    data = write_csv(folder / "pontius.csv", ["load", "deflection"], zip(d.x, d.y, strict=True))
    model = folder / "pontius.json"
    assert main(["fit", str(data), "--degree", "2", "--save-model", str(model)]) == 0
    res = sm.OLS(d.y, np.vander(d.x / SCALE, 3, increasing=True)).fit()
    return d, data, model, Reference(res, SCALE)


# -- read-back ----------------------------------------------------------------------------


@pytest.mark.parametrize("k", [1, 3])
def test_read_back_matches_statsmodels_on_pontius(capsys, pontius_model, k):
    """NIST StRD Pontius, quadratic: x0, interval ends, u(x0) against statsmodels OLS + brentq (e-Handbook 4.5.2.1)."""
    d, _, model, ref = pontius_model
    readings = [0.35, 0.9, 1.2, 1.45, 2.0]
    got, err = cli_json(capsys, "predict", model, "--from-y", *readings, "--readings", k)
    assert got["mode"] == "read_back" and got["readings"] == k and got["monotonic"] is True
    assert [r["y"] for r in got["rows"]] == readings
    for row, y0 in zip(got["rows"], readings, strict=True):
        x0, xl, xu, u = ref.read(y0, k, d.x.min(), d.x.max())
        half = (xu - xl) / 2
        assert row["x"] == pytest.approx(x0, rel=1e-6)  # statsmodels OLS + brentq
        assert abs(row["x_lower"] - xl) <= 1e-3 * half  # e-Handbook 4.5.2.1 via statsmodels covariance
        assert abs(row["x_upper"] - xu) <= 1e-3 * half
        assert row["u_x"] == pytest.approx(u, rel=1e-6)  # EURACHEM/CITAC E.3 with statsmodels' covariance
        assert row["roots"] == [row["x"]] and row["warnings"] == [] and row["outside_range"] is False
        assert row["line"] is None and row["readings"] == k
    assert got["warnings"] == [] and "qualified analyst" in got["caution"]


def test_read_back_text_table_and_level(capsys, pontius_model):
    """The text output is a table with the read-back x (statsmodels + brentq at 90 %) and the caution."""
    d, _, model, ref = pontius_model
    code, out, err = cli(capsys, "predict", model, "--from-y", 1.2, "--level", 0.9)
    assert code == 0, err
    x0, xl, xu, _ = ref.read(1.2, 1, d.x.min(), d.x.max(), level=0.9)
    assert "90 % calibration intervals" in out and "qualified analyst" in out
    line = next(ln for ln in out.splitlines() if ln.lstrip().startswith("1 "))
    cells = [float(v) for v in line.split()[1:6]]
    assert cells[0] == 1.2
    assert cells[1] == pytest.approx(x0, rel=1e-6)
    assert cells[2] == pytest.approx(xl, rel=1e-5) and cells[3] == pytest.approx(xu, rel=1e-5)


def test_read_back_batch_from_a_column_and_a_plain_list(capsys, pontius_model, tmp_path):
    """--input with --y COL, and a one-column list with --from-y, give the same rows as --from-y values."""
    _, _, model, _ = pontius_model
    readings = [0.5, 1.0, 1.5]
    table = write_csv(tmp_path / "unknowns.csv", ["vial", "deflection"], [(i, v) for i, v in enumerate(readings, 1)])
    plain = tmp_path / "plain.txt"
    plain.write_text("".join(f"{v}\n" for v in readings))
    direct, _ = cli_json(capsys, "predict", model, "--from-y", *readings)
    by_col, _ = cli_json(capsys, "predict", model, "--input", table, "--y", "deflection")
    by_list, _ = cli_json(capsys, "predict", model, "--input", plain, "--from-y")
    default_col, _ = cli_json(capsys, "predict", model, "--input", table, "--from-y")  # the model's y name
    for got in (by_col, by_list, default_col):
        assert [r["x"] for r in got["rows"]] == [r["x"] for r in direct["rows"]]
        assert [r["x_upper"] for r in got["rows"]] == [r["x_upper"] for r in direct["rows"]]
    assert [r["line"] for r in by_col["rows"]] == [2, 3, 4]  # the file's own line numbers
    assert [r["line"] for r in by_list["rows"]] == [1, 2, 3]


def test_read_back_csv_is_written_through_handover(capsys, pontius_model, tmp_path):
    """The --output CSV holds the same numbers as the JSON rows (Python's csv reader), input untouched."""
    _, _, model, _ = pontius_model
    table = write_csv(tmp_path / "unknowns.csv", ["vial", "deflection"], [(1, 0.5), (2, 5.0)])
    before = table.read_bytes()
    out_csv = tmp_path / "read_back.csv"
    got, _ = cli_json(capsys, "predict", model, "--input", table, "--y", "deflection", "--output", out_csv)
    assert table.read_bytes() == before and got["output_file"] == str(out_csv)
    rows = list(csv.reader(io.StringIO(out_csv.read_text())))
    assert rows[0][:4] == ["line", "deflection (reading)", "readings averaged", "load (read back)"]
    assert rows[0][4:7] == ["calibration lower 95%", "calibration upper 95%", "standard uncertainty of load"]
    first, second = rows[1], rows[2]
    assert float(first[3]) == got["rows"][0]["x"] and float(first[6]) == got["rows"][0]["u_x"]
    assert first[7] == "no" and first[8] == "1" and first[9] == f"x = {got['rows'][0]['x']!r}"
    assert second[3] == "" and second[7] == "yes" and second[8] == "0"  # 5.0 is beyond the standards' responses
    assert "outside the responses" in second[10]


def test_reading_outside_the_standards_is_said_and_x_is_null(capsys, pontius_model):
    """A reading beyond the fitted responses has no root in range: x null, a sentence, exit 0."""
    _, _, model, _ = pontius_model
    got, err = cli_json(capsys, "predict", model, "--from-y", -1.0, 1.0)
    bad = got["rows"][0]
    assert bad["x"] is None and bad["roots"] == [] and bad["outside_range"] is True
    assert "outside the responses the standards cover" in bad["warnings"][0]
    assert got["no_single_root_count"] == 1 and got["outside_range_count"] == 1
    assert "warning: 1 of 2 readings lie outside" in err
    code, out, _ = cli(capsys, "predict", model, "--from-y", -1.0)
    assert code == 0 and "outside" in out and "cannot be read back without extrapolating" in out


@pytest.fixture(scope="module")
def hump_model(tmp_path_factory):
    """Invented: a quadratic that rises then falls over 0..10, exact values (no noise) plus a tiny wobble."""
    x = np.linspace(0.0, 10.0, 21)
    y = -((x - 5.0) ** 2) + 25.0 + 0.01 * np.cos(7 * x)
    folder = tmp_path_factory.mktemp("hump")
    data = write_csv(folder / "hump.csv", ["dose", "signal"], zip(x, y, strict=True))
    model = folder / "hump.json"
    assert main(["fit", str(data), "--degree", "2", "--save-model", str(model)]) == 0
    return model, json.loads(model.read_text())


def test_two_roots_in_range_are_listed_and_the_turn_is_named(capsys, hump_model):
    """A reading on a curve that turns matches two x: both listed (numpy.roots), x null, f′'s sign change named."""
    model, doc = hump_model
    got, err = cli_json(capsys, "predict", model, "--from-y", 16.0)
    row = got["rows"][0]
    c = doc["coefficients"]
    expected = sorted(r.real for r in np.roots([c[2], c[1], c[0] - 16.0]))  # numpy.roots, power basis
    assert row["x"] is None and row["roots"] == pytest.approx(expected, rel=1e-9)
    assert "matches 2 values of x" in row["warnings"][0]
    assert got["monotonic"] is False and got["turning_points"] == pytest.approx([-c[1] / (2 * c[2])], rel=1e-9)
    assert any("slope changes sign at x = " in w for w in got["warnings"])
    code, out, _ = cli(capsys, "predict", model, "--from-y", 16.0)
    assert code == 0 and "2 roots" in out and "slope changes sign" in out and "cannot be read back to one" in out


def test_unbounded_interval_end_is_said(capsys, tmp_path):
    """Invented noisy line: a reading near the top response has an upper end beyond the range (null, in words)."""
    rng = np.random.default_rng(7)
    x = np.linspace(1.0, 10.0, 10)
    y = 2.0 * x + 1.0 + rng.normal(0.0, 0.5, x.size)
    data = write_csv(tmp_path / "line.csv", ["conc", "resp"], zip(x, y, strict=True))
    model = tmp_path / "line.json"
    assert main(["fit", str(data), "--degree", "1", "--save-model", str(model)]) == 0
    capsys.readouterr()
    doc = json.loads(model.read_text())
    top = doc["coefficients"][0] + doc["coefficients"][1] * 9.95
    got, _ = cli_json(capsys, "predict", model, "--from-y", top)
    row = got["rows"][0]
    assert row["x"] == pytest.approx(9.95, rel=1e-9) and row["x_upper"] is None and row["x_lower"] < 9.95
    assert any("upper end" in w and "not bounded" in w for w in row["warnings"])
    code, out, err = cli(capsys, "predict", model, "--from-y", top)
    assert "open end" in out and "not bounded inside the calibrated range" in out
    assert "have an end not bounded" in err


@pytest.mark.parametrize("bad", ["abc", "nan", "inf", "1,5", "", "1e999"])
def test_bad_readings_on_the_command_line_are_refused(capsys, pontius_model, bad):
    """Text, NaN or infinity after --from-y: exit 2, one error line naming it, no number printed."""
    _, _, model, _ = pontius_model
    err = one_error(*cli(capsys, "predict", model, "--from-y", "1.0", bad))
    assert "a reading must be a finite number" in err and repr(bad) in err
    # "-inf" looks like an option to the parser: refused all the same, by name
    err = one_error(*cli(capsys, "predict", model, "--from-y", "1.0", "-inf"))
    assert "-inf" in err


def test_bad_readings_in_a_file_are_refused_with_their_lines(capsys, pontius_model, tmp_path):
    """Empty, text and overflowing cells in the readings column: exit 2 naming their file lines."""
    _, _, model, _ = pontius_model
    src = tmp_path / "readings.csv"
    src.write_text("deflection\n0.5\n\nabc\n1e999\n1.0\n")
    err = one_error(*cli(capsys, "predict", model, "--input", src, "--from-y"))
    assert "lines 4 and 5" in err and "none is read back" in err


def test_too_many_readings_are_refused(capsys, pontius_model, tmp_path, monkeypatch):
    """More readings than the limit, on the command line or in a file: exit 2, nothing read back."""
    _, _, model, _ = pontius_model
    monkeypatch.setattr(_readback, "MAX_READINGS", 3)
    err = one_error(*cli(capsys, "predict", model, "--from-y", 0.5, 0.6, 0.7, 0.8))
    assert "4 readings are more than the 3" in err
    src = tmp_path / "many.txt"
    src.write_text("0.5\n0.6\n0.7\n0.8\n")
    err = one_error(*cli(capsys, "predict", model, "--input", src, "--from-y"))
    assert "4 readings" in err and "split the file" in err


@pytest.mark.parametrize(
    "args, words",
    [
        (("--from-y",), "--from-y needs readings"),
        (("--from-y", 1.0, "--at", 2.0), "not both"),
        (("--from-y", 1.0, "--x", "load"), "--y"),
        (("--at", 2.0, "--readings", 3), "--readings applies"),
        (("--at", 2.0, "--y", "deflection"), "--y picks the column of readings"),
        (("--from-y", 1.0, "--readings", 0), "--readings"),
        (("--from-y", 1.0, "--level", 1.5), "--level"),
        ((), "--from-y"),
    ],
)
def test_read_back_option_mistakes_are_refused(capsys, pontius_model, args, words):
    _, _, model, _ = pontius_model
    err = one_error(*cli(capsys, "predict", model, *args))
    assert words in err


def test_degree_zero_model_cannot_be_read_back(capsys, tmp_path):
    """A constant cannot be inverted: exit 2 with the engine's sentence."""
    data = write_csv(tmp_path / "flat.csv", ["a", "b"], [(1, 2), (2, 2.1), (3, 1.9)])
    model = tmp_path / "flat.json"
    assert main(["fit", str(data), "--degree", "0", "--save-model", str(model)]) == 0
    capsys.readouterr()
    err = one_error(*cli(capsys, "predict", model, "--from-y", 2.0))
    assert "degree-0" in err.lower() or "constant" in err


def test_a_version_1_model_file_still_reads_back(capsys, pontius_model, tmp_path):
    """A model file of version 1 (no weighting or newer keys) loads and reads back the same x."""
    _, _, model, _ = pontius_model
    doc = json.loads(model.read_text())
    old = {k: v for k, v in doc.items() if k not in ("weighting", "plain_rmse", "fitted_from")}
    old["version"] = 1
    old.pop("weighted_rmse", None)
    v1 = tmp_path / "v1.json"
    v1.write_text(json.dumps(old))
    now, _ = cli_json(capsys, "predict", model, "--from-y", 1.2)
    then, _ = cli_json(capsys, "predict", v1, "--from-y", 1.2)
    assert then["rows"][0]["x"] == now["rows"][0]["x"]
    assert then["rows"][0]["x_lower"] == now["rows"][0]["x_lower"]
    assert then["weighting"] == "none"


# -- fit: named weighting, back-calculated standards, weighting comparison ---------------

LEVELS = np.array([1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0])


@pytest.fixture(scope="module")
def assay(tmp_path_factory):
    """Invented assay standards: 7 levels in triplicate, a slight bend, spread growing with x (5 %)."""
    rng = np.random.default_rng(20261202)
    x = np.repeat(LEVELS, 3)
    y = (0.5 + 2.0 * x + 0.002 * x**2) * (1.0 + 0.05 * rng.standard_normal(x.size))
    folder = tmp_path_factory.mktemp("assay")
    path = folder / "assay.csv"
    path.write_text(
        "# invented assay standards\nconc,area\n"
        + "".join(f"{float(a)!r},{float(b)!r}\n" for a, b in zip(x, y, strict=True))
    )
    return path, x, y


def _wls(x, y, degree, w=None):
    design = np.vander(x, degree + 1, increasing=True)
    return sm.OLS(y, design).fit() if w is None else sm.WLS(y, design, weights=w).fit()


def _x_back(res, y0, lo, hi):
    """brentq on the statsmodels curve over the range widened by 20 % (the engine's margin); None without a root.

    The curves here rise over that span, so a sign change is the one root."""
    b = np.asarray(res.params)
    f = lambda u: float(u ** np.arange(b.size) @ b) - y0  # noqa: E731
    a, c = lo - 0.2 * abs(lo), hi + 0.2 * abs(hi)
    return brentq(f, a, c, xtol=1e-14) if f(a) * f(c) < 0 else None


def test_fit_with_a_named_weighting_matches_statsmodels_wls(capsys, assay, tmp_path):
    """--weighting 1/x2: coefficients and SEs equal statsmodels WLS with w = 1/x²; the model records the rule."""
    path, x, y = assay
    model = tmp_path / "w.json"
    got, _ = cli_json(capsys, "fit", path, "--degree", 2, "--weighting", "1/x^2", "--save-model", model)
    res = _wls(x, y, 2, 1.0 / x**2)
    np.testing.assert_allclose(got["coefficients"], res.params, rtol=1e-9)  # statsmodels WLS
    np.testing.assert_allclose(got["standard_errors"], res.bse, rtol=1e-7)
    assert got["weighting"] == "1/x2"
    doc = json.loads(model.read_text())
    assert doc["weighting"] == "1/x2" and doc["version"] >= 2
    # what read-back needs: residual SD, dof, covariance (power basis; and the fitted basis' inverse Gram), range
    assert doc["residual_sd"] == pytest.approx(math.sqrt(res.scale), rel=1e-8) and doc["dof"] == res.df_resid
    np.testing.assert_allclose(doc["covariance"], res.cov_params(), rtol=1e-6)
    assert doc["domain"] == [x.min(), x.max()] and len(doc["stable_form"]["inverse_gram"]) == 3
    # read-back uses s²/w(x0) at the new x (e-Handbook 4.5.2.1 with the weight of the rule; statsmodels WLS)
    ref = Reference(res, 1.0, weight=lambda u: 1.0 / u**2)
    rb, _ = cli_json(capsys, "predict", model, "--from-y", 45.0)
    x0, xl, xu, u = ref.read(45.0, 1, x.min(), x.max())
    row = rb["rows"][0]
    assert rb["weighting"] == "1/x2"
    assert row["x"] == pytest.approx(x0, rel=1e-9) and row["u_x"] == pytest.approx(u, rel=1e-6)
    assert row["x_lower"] == pytest.approx(xl, rel=1e-5) and row["x_upper"] == pytest.approx(xu, rel=1e-5)


def test_weighting_undefined_rows_are_refused_by_line(capsys, tmp_path):
    """1/x with a blank standard at x = 0 (file line 4): exit 2 naming line 4; 1/y with y ≤ 0 likewise."""
    path = tmp_path / "blank.csv"
    path.write_text("conc,area\n1,2.1\n2,4.2\n0,0.1\n5,10.3\n10,19.8\n")
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--weighting", "1/x"))
    assert "line 4" in err and "x = 0" in err
    path.write_text("conc,area\n1,2.1\n2,-0.5\n5,10.3\n10,19.8\n")
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--weighting", "1/y"))
    assert "line 3" in err


def test_weighting_and_weights_column_are_exclusive(capsys, tmp_path):
    path = tmp_path / "w.csv"
    path.write_text("x,y,w\n1,2,1\n2,4.1,1\n3,6.2,1\n4,7.9,1\n")
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--weighting", "1/x", "--weights", "w"))
    assert "--weighting" in err and "--weights" in err
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--weighting", "1/z"))
    assert "1/x2" in err


def test_back_calculation_matches_brentq_and_the_fda_ich_rule(capsys, assay):
    """x_back from brentq on statsmodels' curve; pass flags recomputed by the FDA 2018 / ICH M10 rule by hand."""
    path, x, y = assay
    got, _ = cli_json(capsys, "fit", path, "--degree", 2)
    back = got["back_calculation"]
    res = _wls(x, y, 2)
    assert [r["line"] for r in back["rows"]] == list(range(3, 3 + x.size))  # file lines (comment and header first)
    passing = 0
    for r, xi, yi in zip(back["rows"], x, y, strict=True):
        xb = _x_back(res, yi, x.min(), x.max())
        if xb is None:  # no root near the range: not read back, and failing
            assert r["x_back"] is None and r["within_tolerance"] is False and r["note"]
            continue
        re = (xb - xi) / xi * 100.0
        assert r["x_back"] == pytest.approx(xb, rel=1e-9) and r["relative_error_percent"] == pytest.approx(re, abs=1e-7)
        ok = bool(abs(re) <= (20.0 if xi == x.min() else 15.0))  # ±15 %, ±20 % at the lowest level
        assert r["within_tolerance"] is ok
        passing += ok
    s = back["summary"]
    assert s["standards"] == x.size and s["standards_passing"] == passing
    assert s["share_passing_percent"] == pytest.approx(100.0 * passing / x.size)
    assert s["accepted"] is (passing / x.size >= 0.75 and s["levels_passing"] >= 6)
    assert back["tolerance"] == 15.0 and back["lowest_tolerance"] == 20.0 and "ICH M10" in back["rule"]


def test_tolerances_are_options(capsys, assay):
    """--tolerance 1 --lowest-tolerance 2: the flags follow the new limits (recomputed from the JSON's own errors)."""
    path, x, _ = assay
    got, _ = cli_json(capsys, "fit", path, "--degree", 2, "--tolerance", 1, "--lowest-tolerance", 2)
    for r in got["back_calculation"]["rows"]:
        limit = 2.0 if r["x"] == x.min() else 1.0
        error = r["relative_error_percent"]
        assert r["within_tolerance"] is (error is not None and abs(error) <= limit)
    assert "±1 %" in got["back_calculation"]["rule"]
    err = one_error(*cli(capsys, "fit", path, "--degree", 2, "--tolerance", -5))
    assert "--tolerance" in err


def test_weighting_comparison_matches_statsmodels(capsys, assay):
    """Σ|relative error %| per rule from statsmodels WLS + brentq; the smallest wins (Almeida et al. 2002)."""
    path, x, y = assay
    got, _ = cli_json(capsys, "fit", path, "--degree", 2)
    comp = got["weighting_comparison"]
    weights = {"none": None, "1/x": 1 / x, "1/x2": 1 / x**2, "1/y": 1 / y, "1/y2": 1 / y**2}
    sums = {}
    for rule, w in weights.items():
        res = _wls(x, y, 2, w)
        backs = [_x_back(res, yi, x.min(), x.max()) for yi in y]
        if all(b is not None for b in backs):  # a rule under which a standard does not read back is not ranked
            sums[rule] = sum(abs((b - xi) / xi * 100) for b, xi in zip(backs, x, strict=True))
    by_rule = {r["weighting"]: r for r in comp["rows"]}
    for rule in weights:
        if rule in sums:
            assert by_rule[rule]["sum_abs_relative_error_percent"] == pytest.approx(sums[rule], rel=1e-7)
        else:
            assert by_rule[rule]["sum_abs_relative_error_percent"] is None and by_rule[rule]["rank"] is None
    assert len(sums) >= 2  # the weighted rules read every standard back on these data
    assert comp["best"] == min(sums, key=sums.get)
    assert by_rule[comp["best"]]["rank"] == 1


def test_fit_text_prints_back_calculation_and_comparison(capsys, assay):
    path, x, _ = assay
    code, out, err = cli(capsys, "fit", path, "--degree", 2, "--weighting", "1/x")
    assert code == 0, err
    assert "Fit of degree 2, weighting 1/x" in out
    assert "Back-calculated standards (tolerance ±15 %, ±20 % at the lowest level)" in out
    assert "by the FDA 2018 / ICH M10 rule" in out and f"of {x.size} standards pass" in out
    assert "Weighting comparison" in out and "Smallest sum:" in out


def test_model_file_carries_the_back_calculation_summary(capsys, assay, tmp_path):
    """Beside fitted_from (which stays the block both front ends write): summary, rule and tolerances."""
    path, _, _ = assay
    model = tmp_path / "m.json"
    got, _ = cli_json(capsys, "fit", path, "--degree", 2, "--save-model", model)
    doc = json.loads(model.read_text())
    summary = doc["back_calculation_summary"]
    assert summary["summary"] == got["back_calculation"]["summary"]
    assert summary["tolerance"] == 15.0 and "ICH M10" in summary["rule"]
    assert doc["weighting"] == "none" and "back_calculation" not in doc["fitted_from"]


def test_back_calculation_left_out_with_a_reason(capsys, assay, monkeypatch):
    """Degree 0 cannot be read back; more rows than the limit are not read back one by one: null and why."""
    from app.cli import _standards

    path, _, _ = assay
    got, _ = cli_json(capsys, "fit", path, "--degree", 0)
    assert got["back_calculation"] is None and "degree-0" in got["back_calculation_reason"]
    assert got["weighting_comparison"] is None
    monkeypatch.setattr(_standards, "STANDARDS_ROW_LIMIT", 5)
    got, _ = cli_json(capsys, "fit", path, "--degree", 2)
    assert got["back_calculation"] is None and "more than the 5" in got["back_calculation_reason"]
