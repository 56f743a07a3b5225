"""The verdict's rule and the evidence beside it on the command line; rows left out on purpose.

References named beside each check:
* scikit-learn RepeatedKFold(10 folds, 5 repeats, random_state = seed) and GroupKFold (whole x
  levels), with StandardScaler + PolynomialFeatures + LinearRegression: per-fold test RMSE,
  mean and standard error across folds.
* The one-standard-error rule (common practice, no source): the lowest degree whose mean
  test RMSE is within one standard error of the lowest.
* statsmodels ``anova_lm`` of nested OLS models: lack of fit against pure error (the
  polynomial against one mean per x level; NIST/SEMATECH e-Handbook 4.4.4.6) and the added
  term (degree d − 1 against d); Mandel's PG equals the added-term F of the quadratic
  (ISO 8466-1, formula from memory), its critical value scipy's F(1, N − 3) at 99 %.
* statsmodels OLSInfluence: leverage, externally studentized residuals, Cook's distance, DFFITS.
* numpy / statsmodels fits on the file with the excluded lines removed (the fit must be the same).
* The replicate data are invented; the sensor sample is the invented sample file.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from scipy import stats
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import GroupKFold, RepeatedKFold, cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.outliers_influence import OLSInfluence

import fitting
from app.cli import main, sweep

ROOT = Path(__file__).resolve().parent.parent
SENSOR = ROOT / "sample_data" / "sensor_calibration.csv"


def cli(capsys, *args):
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


def sklearn_rmse(x, y, degrees, splitter, groups=None):
    out = []
    for d in degrees:
        model = make_pipeline(StandardScaler(), PolynomialFeatures(d), LinearRegression())
        scores = cross_val_score(
            model, x[:, None], y, cv=splitter, groups=groups, scoring="neg_root_mean_squared_error"
        )
        out.append(-scores)
    return np.array(out)


def one_se(mean, se):
    best = int(np.argmin(mean))
    return int(np.nonzero(mean <= mean[best] + se[best])[0][0])


@pytest.fixture(scope="module")
def replicates(tmp_path_factory):
    """Invented: 8 x levels in triplicate on a gentle cubic, with noise (seeded)."""
    rng = np.random.default_rng(11)
    x = np.repeat(np.linspace(1.0, 8.0, 8), 3)
    y = 2.0 + 0.8 * x - 0.15 * x**2 + 0.012 * x**3 + rng.normal(0.0, 0.05, x.size)
    path = tmp_path_factory.mktemp("reps") / "reps.csv"
    path.write_text(
        "# invented replicates\nlevel,signal\n"
        + "".join(f"{a!r},{b!r}\n" for a, b in zip(x.tolist(), y.tolist(), strict=True))
    )
    return path, x, y


# -- the verdict's rule ---------------------------------------------------------------------


def test_the_verdict_degrees_are_the_engines():
    assert sweep.VERDICT_MAX_DEGREE == fitting.MAX_DEGREE


def test_default_sweep_is_the_verdict_and_matches_scikit_learn_repeated_kfold(capsys):
    """No split options: 10 folds repeated 5 times (seed 0) = scikit-learn RepeatedKFold; one-SE rule; rule stated."""
    frame = pd.read_csv(SENSOR, comment="#")
    x, y = frame["output (mV)"].to_numpy(), frame["temperature (°C)"].to_numpy()
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 5, "--stability-draws", 0)
    folds = sklearn_rmse(x, y, range(6), RepeatedKFold(n_splits=10, n_repeats=5, random_state=0))
    mean, se = folds.mean(axis=1), folds.std(axis=1, ddof=1) / math.sqrt(folds.shape[1])
    np.testing.assert_allclose(d["test_rmse"], mean, rtol=1e-7)  # scikit-learn RepeatedKFold
    np.testing.assert_allclose(d["test_rmse_se"], se, rtol=1e-6)
    assert d["recommended_degree"] == one_se(mean, se)
    assert d["verdict_rule"].startswith("10-fold cross-validation repeated 5 times, degrees 0–5, seed 0")
    # the same call the dashboard's verdict makes
    sel = fitting.read_table(SENSOR).select()
    engine = fitting.verdict_sweep(sel.x, sel.y, degrees=range(6))
    assert d["verdict_rule"] == engine.verdict_rule and d["recommended_degree"] == engine.recommended_degree


def test_default_sweep_holds_out_whole_x_levels_as_group_kfold(capsys, replicates):
    """x with replicates: whole levels held out, dealt as scikit-learn's GroupKFold deals groups."""
    path, x, y = replicates
    d, _ = cli_json(capsys, "sweep", path, "--max-degree", 4, "--stability-draws", 0)
    levels = np.unique(x, return_inverse=True)[1]
    folds = sklearn_rmse(x, y, range(5), GroupKFold(n_splits=8), groups=levels)
    np.testing.assert_allclose(d["test_rmse"], folds.mean(axis=1), rtol=1e-7)  # scikit-learn GroupKFold
    assert "whole x levels held out (8 levels with replicates)" in d["verdict_rule"]
    code, out, err = cli(capsys, "sweep", path, "--max-degree", 4, "--stability-draws", 0)
    assert code == 0 and f"by this rule: {d['verdict_rule']}" in out


def test_default_degrees_are_0_to_20(capsys):
    d, _ = cli_json(capsys, "sweep", SENSOR, "--stability-draws", 0)
    assert d["degrees"] == list(range(21))


def test_split_options_keep_the_sweep_asked_for_and_say_so(capsys):
    """--folds 5 --seed 3: scikit-learn KFold numbers as before; the recommendation names that rule."""
    from sklearn.model_selection import KFold

    frame = pd.read_csv(SENSOR, comment="#")
    x, y = frame["output (mV)"].to_numpy(), frame["temperature (°C)"].to_numpy()
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 4, "--folds", 5, "--seed", 3)
    folds = sklearn_rmse(x, y, range(5), KFold(5, shuffle=True, random_state=3))
    np.testing.assert_allclose(d["test_rmse"], folds.mean(axis=1), rtol=1e-7)
    assert d["verdict_rule"].startswith("The sweep asked for (") and d["recommendation_rule"] in d["verdict_rule"]
    code, out, _ = cli(capsys, "sweep", SENSOR, "--max-degree", 4, "--folds", 5, "--stability-draws", 0)
    assert "Recommended degree: " in out and "by this rule: The sweep asked for" in out


def test_group_column_alone_is_the_verdicts_grouped_rule(capsys):
    """--group batch: one batch held out at a time (the verdict's grouped rule), rule stated with the group count."""
    d, _ = cli_json(capsys, "sweep", SENSOR, "--group", "batch", "--max-degree", 4, "--stability-draws", 0)
    assert d["n_splits"] == 4 and "holding out one group at a time (4 groups)" in d["verdict_rule"]


# -- evidence in sweep --json ----------------------------------------------------------------


def _anova_lof(x, y, degree):
    """Lack of fit of the polynomial against one mean per level (statsmodels anova_lm of nested OLS)."""
    frame = pd.DataFrame({"x": x, "y": y})
    terms = " + ".join(["x"] + [f"I(x**{k})" for k in range(2, degree + 1)]) if degree else "1"
    poly = smf.ols(f"y ~ {terms}", frame).fit()
    levels = smf.ols("y ~ C(x)", frame).fit()
    table = anova_lm(poly, levels)
    return float(table["F"].iloc[1]), float(table["Pr(>F)"].iloc[1]), poly


def _anova_added(x, y, degree):
    low = sm.OLS(y, np.vander(x, degree, increasing=True)).fit()
    high = sm.OLS(y, np.vander(x, degree + 1, increasing=True)).fit()
    table = anova_lm(low, high)
    return float(table["F"].iloc[1]), float(table["Pr(>F)"].iloc[1])


def test_sweep_json_lack_of_fit_and_added_term_match_statsmodels(capsys, replicates):
    """Per degree: lack-of-fit F and p (e-Handbook 4.4.4.6) and added-term p, from statsmodels anova_lm."""
    path, x, y = replicates
    d, _ = cli_json(capsys, "sweep", path, "--max-degree", 5, "--stability-draws", 0)
    assert d["degrees"] == list(range(6))
    for i, deg in enumerate(d["degrees"]):
        f, p, _ = _anova_lof(x, y, deg)
        assert d["lack_of_fit_f"][i] == pytest.approx(f, rel=1e-6)  # statsmodels anova_lm
        assert d["lack_of_fit_p"][i] == pytest.approx(p, rel=1e-5, abs=1e-12)
        if deg == 0:
            assert d["added_term_p"][i] is None
        else:
            assert d["added_term_p"][i] == pytest.approx(_anova_added(x, y, deg)[1], rel=1e-5, abs=1e-12)
    assert len(d["aic"]) == len(d["bic"]) == 6
    assert isinstance(d["evidence_sentence"], str) and f"Degree {d['recommended_degree']}" in d["evidence_sentence"]


def test_sweep_without_replicates_says_why_lack_of_fit_is_null(capsys):
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 4, "--stability-draws", 0)
    assert d["lack_of_fit_f"] == [None] * 5 and d["lack_of_fit_p"] == [None] * 5
    assert "replicates" in d["lack_of_fit_reason"]
    assert d["verdict_stability"] is None and "--stability-draws 0" in d["verdict_stability_reason"]


def test_sweep_verdict_stability_shares_and_draws(capsys, replicates):
    """Shares over the draws add to 1, the modal degree has the largest; the same seed gives the same shares."""
    path, _, _ = replicates
    a, _ = cli_json(capsys, "sweep", path, "--max-degree", 4, "--stability-draws", 30)
    b, _ = cli_json(capsys, "sweep", path, "--max-degree", 4, "--stability-draws", 30)
    st = a["verdict_stability"]
    assert st["draws"] == 30 and sum(st["counts"]) == 30
    assert sum(st["by_degree"].values()) == pytest.approx(1.0)
    assert st["by_degree"][str(st["modal_degree"])] == max(st["by_degree"].values())
    assert st == b["verdict_stability"]
    code, out, _ = cli(capsys, "sweep", path, "--max-degree", 4, "--stability-draws", 30)
    assert "Verdict stability: degree" in out and "added-term p" in out and "lack-of-fit p" in out


# -- evidence in fit --json ------------------------------------------------------------------


def test_fit_json_lack_of_fit_mandel_and_influence_match_statsmodels(capsys, replicates):
    path, x, y = replicates
    d, _ = cli_json(capsys, "fit", path, "--degree", 2)
    f, p, _ = _anova_lof(x, y, 2)
    lof = d["lack_of_fit"]
    assert lof["f"] == pytest.approx(f, rel=1e-6) and lof["p_value"] == pytest.approx(p, rel=1e-5)
    assert lof["df_lack_of_fit"] == 8 - 3 and lof["df_pure_error"] == 24 - 8 and d["lack_of_fit_reason"] is None
    # Mandel (ISO 8466-1): PG = the added-term F of the quadratic; critical value F(1, N - 3) at 99 % (scipy)
    pg, _ = _anova_added(x, y, 2)
    assert d["mandel"]["pg"] == pytest.approx(pg, rel=1e-6)
    assert d["mandel"]["critical_value"] == pytest.approx(stats.f.ppf(0.99, 1, x.size - 3), rel=1e-9)
    # influence: statsmodels OLSInfluence on the same quadratic
    ols = sm.OLS(y, np.vander(x, 3, increasing=True)).fit()
    ref = OLSInfluence(ols)
    rows = d["influence"]["rows"]
    assert [r["line"] for r in rows] == list(range(3, 3 + x.size))
    np.testing.assert_allclose([r["leverage"] for r in rows], ref.hat_matrix_diag, rtol=1e-8)
    np.testing.assert_allclose([r["studentized_residual"] for r in rows], ref.resid_studentized_external, rtol=1e-6)
    np.testing.assert_allclose([r["cooks_distance"] for r in rows], ref.cooks_distance[0], rtol=1e-6)
    np.testing.assert_allclose([r["dffits"] for r in rows], ref.dffits[0], rtol=1e-6)
    assert d["influence"]["flagged_lines"] == [r["line"] for r in rows if r["verdict"] != "ok"]


def test_fit_json_without_replicates_gives_the_reason_and_no_mandel_above_degree_2(capsys):
    d, _ = cli_json(capsys, "fit", SENSOR, "--degree", 3)
    assert d["lack_of_fit"] is None and "replicates" in d["lack_of_fit_reason"]
    assert "mandel" not in d
    d, _ = cli_json(capsys, "fit", SENSOR, "--degree", 1)
    assert d["mandel"]["quadratic_better"] in (True, False) and "not proof of linearity" in d["mandel"]["caution"]
    code, out, _ = cli(capsys, "fit", SENSOR, "--degree", 1)
    assert "Mandel's fitting test (ISO 8466-1)" in out and "Lack of fit: not tested" in out and "Influence:" in out


# -- rows left out on purpose ----------------------------------------------------------------


def _without_lines(src: Path, dest: Path, lines: set[int]) -> Path:
    kept = [t for i, t in enumerate(src.read_text().splitlines(keepends=True), start=1) if i not in lines]
    dest.write_text("".join(kept))
    return dest


def test_excluded_rows_give_the_fit_on_the_file_without_them(capsys, tmp_path):
    """--exclude-rows 8,20-21: the same fit as on a copy of the file without those lines; the file is unchanged."""
    before = hashlib.sha256(SENSOR.read_bytes()).hexdigest()
    model = tmp_path / "m.json"
    got, _ = cli_json(
        capsys, "fit", SENSOR, "--degree", 3, "--exclude-rows", "8,20-21", "--exclude-reason", "chamber door open",
        "--save-model", model,
    )  # fmt: skip
    copy = _without_lines(SENSOR, tmp_path / "copy.csv", {8, 20, 21})
    ref, _ = cli_json(capsys, "fit", copy, "--degree", 3)
    assert got["coefficients"] == ref["coefficients"] and got["standard_errors"] == ref["standard_errors"]
    assert got["rows_used"] == 117 == ref["rows_used"]
    assert got["rows_excluded"] == {"lines": [8, 20, 21], "reason": "chamber door open", "count": 3}
    frame = pd.read_csv(copy, comment="#")
    npfit = np.polynomial.Polynomial.fit(frame["output (mV)"], frame["temperature (°C)"], 3).convert()
    np.testing.assert_allclose(got["coefficients"], npfit.coef, rtol=1e-8)  # numpy on the reduced file
    block = json.loads(model.read_text())["fitted_from"]
    assert block["rows_excluded"] == {"lines": [8, 20, 21], "reason": "chamber door open"}
    assert "except 3 left out on purpose" in block["fitted_on"]
    assert hashlib.sha256(SENSOR.read_bytes()).hexdigest() == before
    code, out, _ = cli(capsys, "fit", SENSOR, "--degree", 3, "--exclude-rows", 8)
    assert "Left out on purpose 1 row, line 8 (no reason given)." in out


def test_excluded_rows_in_the_sweep_match_the_reduced_file(capsys, tmp_path):
    got, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 4, "--exclude-rows", "9,10", "--stability-draws", 0)
    copy = _without_lines(SENSOR, tmp_path / "copy.csv", {9, 10})
    ref, _ = cli_json(capsys, "sweep", copy, "--max-degree", 4, "--stability-draws", 0)
    assert got["test_rmse"] == ref["test_rmse"] and got["recommended_degree"] == ref["recommended_degree"]
    assert got["rows_excluded"]["lines"] == [9, 10] and got["rows_used"] == 118


@pytest.mark.parametrize(
    "lines, words",
    [
        ("3", "line 3 holds no data row"),  # a comment line above the header
        ("7", "line 7 holds no data row"),  # the header
        ("500", "line 500 holds no data row"),
        ("0", "1 or more"),
        ("x", "line numbers"),
        ("9-5", "ranges"),
    ],
)
def test_unknown_excluded_lines_are_refused(capsys, lines, words):
    err = one_error(*cli(capsys, "fit", SENSOR, "--degree", 1, "--exclude-rows", lines))
    assert words in err


def test_a_line_the_intake_already_left_out_is_refused_with_its_reason(capsys, tmp_path):
    path = tmp_path / "gap.csv"
    path.write_text("x,y\n1,2.0\n2,\n3,6.1\n4,8.0\n5,9.9\n")
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--exclude-rows", 3))
    assert "line 3 is already left out" in err and "y" in err


def test_exclude_reason_needs_rows_and_all_rows_cannot_go(capsys, tmp_path):
    err = one_error(*cli(capsys, "fit", SENSOR, "--degree", 1, "--exclude-reason", "why"))
    assert "--exclude-reason needs --exclude-rows" in err
    path = tmp_path / "tiny.csv"
    path.write_text("x,y\n1,2\n2,4\n")
    err = one_error(*cli(capsys, "fit", path, "--degree", 1, "--exclude-rows", "2-3"))
    assert "leaves no rows" in err


def test_excluded_rows_need_the_rows_in_memory(capsys, monkeypatch):
    """Data read in chunks cannot leave out file lines: refused by name, as the other in-memory options are."""
    monkeypatch.setattr(sweep, "STREAM_ABOVE_BYTES", 1000)  # stands in for 64 MiB
    err = one_error(*cli(capsys, "sweep", ROOT / "sample_data" / "van_fuel.csv", "--exclude-rows", 9))
    assert "--exclude-rows" in err and "read in chunks" in err


def test_stability_redraws_follow_the_rule_that_made_the_recommendation(capsys):
    """The verdict's sweep: its own folds (the first redraw is the verdict's split, so one draw agrees with it);
    a sweep asked for with --folds 5 --repeats 2: redraws of 5 folds, 2 repeats."""
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 5, "--stability-draws", 1)
    st = d["verdict_stability"]
    assert (st["folds"], st["repeats"], st["held_out"]) == (10, 5, "rows")
    assert st["modal_degree"] == d["recommended_degree"] and st["draws"] == 1
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 5, "--folds", 5, "--repeats", 2, "--stability-draws", 3)
    assert (d["verdict_stability"]["folds"], d["verdict_stability"]["repeats"]) == (5, 2)
    d, _ = cli_json(capsys, "sweep", SENSOR, "--max-degree", 3, "--holdout", 0.25)
    assert d["verdict_stability"] is None and "single holdout" in d["verdict_stability_reason"]
