"""Degree sweep speed and accuracy.

    .venv/bin/python benchmarks/bench_sweep.py [--rows 100000] [--repeats 7] [--sklearn-repeats 1]

Prints median times (interleaved repeats) and ratios of:
  * sweep_degrees, degrees 0-15 x 10 shuffled folds, on --rows rows (invented data),
  * one numpy Polynomial.fit of degree 15 on all rows,
  * scikit-learn validation_curve over PolynomialFeatures -> StandardScaler -> LinearRegression
    with the same folds (KFold(10, shuffle=True, random_state=seed)),
and the largest relative difference of fold test MSE against a plain per-fold Polynomial.fit refit.
Then the LRE table on the five NIST StRD polynomial sets in tests/data/nist_strd/: our fit,
numpy.polyfit, and Polynomial.fit(...).convert().
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings

import numpy as np
from _common import ROOT, blas_limit, environment, interleaved_medians
from numpy.polynomial import Polynomial

sys.path.insert(0, str(ROOT / "tests"))

from nist import POLYNOMIAL_SETS, load, lre  # noqa: E402

from fitting import fit_polynomial, sweep_degrees  # noqa: E402


def invented_data(n: int, seed: int = 0):
    # invented: a drifting sensor response with noise
    rng = np.random.default_rng(seed)
    x = rng.uniform(-3.0, 3.0, n)
    y = np.sin(1.7 * x) + 0.1 * x**3 + rng.normal(0.0, 0.3, n)
    return x, y


def speed(n: int, repeats: int, sk_repeats: int, seed: int = 0) -> None:
    from sklearn.linear_model import LinearRegression
    from sklearn.model_selection import KFold, validation_curve
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import PolynomialFeatures, StandardScaler

    x, y = invented_data(n, seed)
    degrees = list(range(0, 16))
    med = interleaved_medians(
        {
            "sweep": lambda: sweep_degrees(x, y, degrees=degrees, folds=10, seed=seed),
            "numpy": lambda: Polynomial.fit(x, y, 15),
        },
        repeats=repeats,
    )
    cv = KFold(10, shuffle=True, random_state=seed)
    pipe = make_pipeline(PolynomialFeatures(include_bias=False), StandardScaler(), LinearRegression())
    sk_times = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _ in range(sk_repeats):
            t0 = time.perf_counter()
            validation_curve(
                pipe,
                x[:, None],
                y,
                param_name="polynomialfeatures__degree",
                param_range=degrees,
                cv=cv,
                scoring="neg_mean_squared_error",
            )
            sk_times.append(time.perf_counter() - t0)
    t_sk = float(np.median(sk_times))

    s = sweep_degrees(x, y, degrees=degrees, folds=10, seed=seed)
    worst = 0.0
    for j, (tr, te) in enumerate(cv.split(x)):
        for i, d in enumerate(degrees):
            p = Polynomial.fit(x[tr], y[tr], d)
            mse = float(np.mean((y[te] - p(x[te])) ** 2))
            worst = max(worst, abs(s.test_rmse_folds[i, j] ** 2 - mse) / mse)

    print(
        f"Degree sweep, degrees 0-15 x 10 folds, {n:,} rows "
        f"(medians of {repeats} interleaved runs; sklearn {sk_repeats})"
    )
    print(f"  sweep_degrees                      {med['sweep'] * 1e3:9.1f} ms")
    ratio = med["sweep"] / med["numpy"]
    print(f"  numpy Polynomial.fit, degree 15    {med['numpy'] * 1e3:9.1f} ms   sweep / numpy   = {ratio:6.2f}x")
    print(f"  sklearn validation_curve pipeline  {t_sk * 1e3:9.1f} ms   sklearn / sweep = {t_sk / med['sweep']:6.0f}x")
    print(f"  max relative difference of fold test MSE vs per-fold Polynomial.fit refits: {worst:.2e}")
    print(f"  recommended degree {s.recommended_degree}: {s.recommendation}")


def lre_table() -> None:
    print("\nNIST StRD polynomial sets: minimum LRE (digits; 15 = all printed digits)")
    header = (
        f"  {'set':9s} {'deg':>3s} | {'ours: coef':>10s} {'SE':>5s} {'res SD':>6s} {'R²':>5s} | "
        f"{'polyfit: coef':>13s} {'SE':>5s} {'res SD':>6s} {'R²':>5s} | "
        f"{'Polynomial.fit: coef':>20s} {'res SD':>6s} {'R²':>5s}"
    )
    print(header)
    for name in POLYNOMIAL_SETS:
        c = load(name)
        d = c.degree
        ks = sorted(c.coefficients)
        n = c.x.size
        fit = fit_polynomial(c.x, c.y, d)
        ours = (
            min(lre(fit.coefficients[k], c.coefficients[k]) for k in ks),
            min(lre(fit.standard_errors[k], c.standard_errors[k]) for k in ks),
            lre(fit.residual_sd, c.residual_sd),
            lre(fit.r_squared, c.r_squared),
        )

        def stats_of(coef_power, c=c, n=n, d=d):
            yhat = np.polynomial.polynomial.polyval(c.x, coef_power)
            rss = float(np.sum((c.y - yhat) ** 2))
            tss = float(np.sum((c.y - c.y.mean()) ** 2))
            return lre(np.sqrt(rss / (n - d - 1)), c.residual_sd), lre(1 - rss / tss, c.r_squared)

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pf, cov = np.polyfit(c.x, c.y, d, cov=True)
        pf = pf[::-1]
        pse = np.sqrt(np.abs(np.diag(cov)))[::-1]
        polyfit = (
            min(lre(pf[k], c.coefficients[k]) for k in ks),
            min(lre(pse[k], c.standard_errors[k]) for k in ks),
            *stats_of(pf),
        )
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pc = Polynomial.fit(c.x, c.y, d).convert().coef
        pc = np.r_[pc, np.zeros(d + 1 - pc.size)]
        polyn = (min(lre(pc[k], c.coefficients[k]) for k in ks), *stats_of(pc))
        print(
            f"  {name:9s} {d:3d} | {ours[0]:10.1f} {ours[1]:5.1f} {ours[2]:6.1f} {ours[3]:5.1f} | "
            f"{polyfit[0]:13.1f} {polyfit[1]:5.1f} {polyfit[2]:6.1f} {polyfit[3]:5.1f} | "
            f"{polyn[0]:20.1f} {polyn[1]:6.1f} {polyn[2]:5.1f}"
        )
    print(
        "  (numpy's residual SD and R² are computed here from its coefficients in double precision;"
        " polyfit's SE from cov=True)"
    )


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--sklearn-repeats", type=int, default=1)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument(
        "--blas-threads",
        type=int,
        default=1,
        help=(
            "BLAS threads for both sides (default 1, what the engine uses for its own LAPACK calls); "
            "0 leaves the library default"
        ),
    )
    args = ap.parse_args(argv)
    with blas_limit(args.blas_threads or None):
        _run(args)


def _run(args) -> None:
    print(environment())
    speed(args.rows, args.repeats, args.sklearn_repeats, args.seed)
    lre_table()


if __name__ == "__main__":
    main()
