#!/usr/bin/env python3
"""Reference values for `steadycal assess --weights ref^P|level^P` and known uncertainties,
from statsmodels at pinned versions (tests/reference/requirements.txt).

Modes:
  (default)  compute and write tests/reference/weights_expected.json.
  --check    recompute and compare with the committed file (1e-12 relative); exit status 1
             on any mismatch.

On the stored runs tests/reference/runs/*.csv (made by assess_reference.py --make-runs):
  - statsmodels WLS of the run's calibration mean (linear or quadratic in ref) with weights
    ref**P for P in (-1, -1.5, -2), and with weights (OLS fitted value)**P for P = -2:
    params, bse, sqrt(scale);
  - statsmodels WLS with weights 1/u**2, u = 0.02 * ref + 0.5 (a stated standard uncertainty
    of each response), fitted with cov_type="fixed scale" (scale 1: the covariance is not
    rescaled, ISO/TS 28037): params, bse, and chi-squared = sum w * resid**2 with its
    scipy chi2.sf p-value on n - p degrees of freedom;
  - Goldfeld-Quandt with unequal groups (split 0.3, drop 0.1 of the rows sorted stably by
    ref: 12 low rows, 24 high rows of 40): F = s2_high / s2_low from separate statsmodels
    OLS fits, p = scipy.stats.f.sf(F, df_high, df_low); and statsmodels' own
    het_goldfeldquandt p-value, which evaluates f.sf(F, df_low, df_high) (the degrees of
    freedom in the other order: equal only for equal groups).
"""

import argparse
import json
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import scipy
import statsmodels
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_goldfeldquandt

HERE = Path(__file__).resolve().parent
RUNS = HERE / "runs"
EXPECTED = HERE / "weights_expected.json"
BASIS = {"constant_sd": "linear", "proportional_sd": "linear", "counting_quadratic": "quadratic"}
REFERENCE_POWERS = [-1.0, -1.5, -2.0]
GQ_SPLIT, GQ_DROP = 0.3, 0.1
LEVEL_POWERS = [-2.0]


def read_run(name):
    frame = pd.read_csv(RUNS / f"{name}.csv", float_precision="round_trip")
    return frame["raw"].to_numpy(float), frame["ref"].to_numpy(float)


def design(ref, basis):
    cols = [np.ones_like(ref), ref]
    if basis == "quadratic":
        cols.append(ref * ref)
    return np.column_stack(cols)


def wls(X, y, w):
    fit = sm.WLS(y, X, weights=w).fit()
    return {
        "params": [float(v) for v in fit.params],
        "bse": [float(v) for v in fit.bse],
        "residual_sd": float(np.sqrt(fit.scale)),
    }


def compute_all():
    out = {
        "versions": {
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
            "pandas": pd.__version__,
        },
        "runs": {},
    }
    for name, basis in BASIS.items():
        y, ref = read_run(name)
        X = design(ref, basis)
        fitted = sm.OLS(y, X).fit().fittedvalues
        run = {"basis": basis, "reference": {}, "level": {}}
        for p in REFERENCE_POWERS:
            run["reference"][repr(p)] = wls(X, y, ref ** p)
        for p in LEVEL_POWERS:
            run["level"][repr(p)] = wls(X, y, fitted ** p)
        u = 0.02 * ref + 0.5
        w = 1.0 / u ** 2
        known = sm.WLS(y, X, weights=w).fit(cov_type="fixed scale")
        chi2 = float(np.sum(w * known.resid ** 2))
        df = len(y) - X.shape[1]
        run["known"] = {
            "params": [float(v) for v in known.params],
            "bse": [float(v) for v in known.bse],
            "chi_squared": chi2,
            "chi_squared_df": df,
            "chi_squared_p": float(stats.chi2.sf(chi2, df)),
        }
        order = np.argsort(ref, kind="stable")
        ys, Xs = y[order], X[order]
        n = len(y)
        low_rows = int(n * GQ_SPLIT)
        high_start = low_rows + int(n * GQ_DROP)
        low = sm.OLS(ys[:low_rows], Xs[:low_rows]).fit()
        high = sm.OLS(ys[high_start:], Xs[high_start:]).fit()
        f_value = float(high.mse_resid / low.mse_resid)
        sm_f, sm_p, _ = het_goldfeldquandt(ys, Xs, split=GQ_SPLIT, drop=GQ_DROP,
                                           alternative="increasing")
        run["goldfeld_quandt"] = {
            "statistic": f_value,
            "df_low": int(low.df_resid),
            "df_high": int(high.df_resid),
            "p_value": float(stats.f.sf(f_value, high.df_resid, low.df_resid)),
            "statsmodels_statistic": float(sm_f),
            "statsmodels_p_value": float(sm_p),
        }
        out["runs"][name] = run
    return out


def compare(expected, actual, path, problems, tolerance=1e-12):
    if isinstance(expected, dict):
        if set(expected) != set(actual):
            problems.append(f"{path}: keys differ")
            return
        for key in expected:
            if key != "versions":
                compare(expected[key], actual[key], f"{path}.{key}", problems, tolerance)
    elif isinstance(expected, list):
        if len(expected) != len(actual):
            problems.append(f"{path}: lengths differ")
            return
        for i, (e, a) in enumerate(zip(expected, actual)):
            compare(e, a, f"{path}[{i}]", problems, tolerance)
    elif isinstance(expected, float):
        if abs(expected - actual) > tolerance * max(abs(expected), 1e-300):
            problems.append(f"{path}: committed {expected!r}, now {actual!r}")
    elif expected != actual:
        problems.append(f"{path}: committed {expected!r}, now {actual!r}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true")
    args = parser.parse_args()
    actual = json.loads(json.dumps(compute_all()))
    if args.check:
        committed = json.loads(EXPECTED.read_text())
        if committed["versions"] != actual["versions"]:
            print(f"note: library versions differ: committed {committed['versions']}, "
                  f"here {actual['versions']}")
        problems = []
        compare(committed, actual, "", problems)
        for problem in problems:
            print(problem)
        print(f"{EXPECTED.name}: {'mismatch' if problems else 'ok'}")
        return 1 if problems else 0
    EXPECTED.write_text(json.dumps(actual, indent=1) + "\n")
    print(f"wrote {EXPECTED}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
