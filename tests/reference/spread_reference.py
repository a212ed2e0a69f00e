#!/usr/bin/env python3
"""Reference values for steadycal's spread profile, from general-purpose libraries.

For each stored feed of (level, residual) pairs in tests/reference/feeds/ this computes

  (a) Koenker's studentized Breusch-Pagan LM statistic with statsmodels
      `het_breuschpagan(resid, add_constant(level), robust=True)` (n * R^2 of the OLS of
      resid^2 on a constant and level), cross-checked against n * corr(level, resid^2)^2;
  (b) the exponent k of SD ~ level^k: weighted least squares of ln SD_b on the mean ln level
      of each bin, with statsmodels WLS, cross-checked with numpy.linalg.lstsq.

Bins, variance convention and weights are those of core/src/spread.rs:
  - 16 bins equally spaced in ln(level) on [LEVEL_LOW, LEVEL_HIGH]; a level below the range
    goes to bin 0, above it to bin 15. The index is computed with the same arithmetic as the
    Rust code: floor((ln level - ln low) * (16 / (ln high - ln low))).
  - bin variance s_b^2 = sum (x - mean)^2 / (n_b - 1) (ddof = 1), weight w_b = n_b - 1,
    bins with n_b >= 2 and s_b > 0, at least 3 bins.
  - standard error of k: max(model-based sqrt(1 / (2 sum w_b (x_b - xbar_w)^2)),
    residual-based WLS standard error (statsmodels `bse`)).

Modes:
  --make-feeds   write the feeds (seeded numpy Generator, deterministic) and the expected JSON
  (default)      recompute and write tests/reference/spread_expected.json
  --check        recompute and compare with the committed JSON (relative 1e-9); exit 1 on a
                 mismatch, 2 on missing files

Pinned library versions: tests/reference/requirements.txt.
"""

import argparse
import csv
import hashlib
import json
import math
import sys
from pathlib import Path

import numpy as np
import pandas
import patsy
import scipy
import statsmodels
import statsmodels.api as sm
from statsmodels.stats.diagnostic import het_breuschpagan

HERE = Path(__file__).resolve().parent
FEEDS_DIR = HERE / "feeds"
EXPECTED = HERE / "spread_expected.json"

BINS = 16
LEVEL_LOW = 1.0
LEVEL_HIGH = 1000.0
ROWS = 3000
TOLERANCE = 1e-9

# name -> (seed, SD as a function of level). Levels are log-uniform on [0.7, 1500] so that
# both end bins also take levels outside [LEVEL_LOW, LEVEL_HIGH]. Invented data for the
# conformance check only.
FEEDS = {
    "constant_sd": (20240101, lambda level: 0.5 * np.ones_like(level)),
    "sd_proportional": (20240102, lambda level: 0.02 * level),
    "sd_sqrt": (20240103, lambda level: 0.1 * np.sqrt(level)),
}


def make_feeds():
    FEEDS_DIR.mkdir(parents=True, exist_ok=True)
    for name, (seed, sd_of) in FEEDS.items():
        rng = np.random.Generator(np.random.PCG64(seed))
        level = np.exp(rng.uniform(math.log(0.7), math.log(1500.0), ROWS))
        residual = sd_of(level) * rng.standard_normal(ROWS)
        with open(FEEDS_DIR / f"{name}.csv", "w", newline="") as handle:
            writer = csv.writer(handle, lineterminator="\n")
            writer.writerow(["level", "residual"])
            for lv, rs in zip(level, residual):
                writer.writerow([repr(float(lv)), repr(float(rs))])


def read_feed(path):
    levels, residuals = [], []
    with open(path, newline="") as handle:
        reader = csv.reader(handle)
        header = next(reader)
        if header != ["level", "residual"]:
            raise SystemExit(f"{path}: line 1: expected header 'level,residual', got {header}")
        for line, row in enumerate(reader, start=2):
            try:
                levels.append(float(row[0]))
                residuals.append(float(row[1]))
            except (IndexError, ValueError) as error:
                raise SystemExit(f"{path}: line {line}: {error}")
    return np.array(levels), np.array(residuals)


def bin_positions(level):
    """Continuous bin coordinate, with the arithmetic of SpreadProfile::bin_of."""
    log_low = math.log(LEVEL_LOW)
    bins_per_log_unit = float(BINS) / (math.log(LEVEL_HIGH) - log_low)
    return np.array([(math.log(v) - log_low) * bins_per_log_unit for v in level])


def bin_indices(positions):
    return np.array([0 if not p > 0 else min(int(math.floor(p)), BINS - 1) for p in positions])


def koenker(level, residual):
    lm, lm_pvalue, _, _ = het_breuschpagan(residual, sm.add_constant(level), robust=True)
    corr = np.corrcoef(level, residual**2)[0, 1]
    cross = len(level) * corr**2
    if not math.isclose(lm, cross, rel_tol=1e-10):
        raise SystemExit(f"het_breuschpagan {lm} and n*corr^2 {cross} disagree")
    return float(lm), float(lm_pvalue)


def exponent(level, residual, index):
    bins = []
    for b in range(BINS):
        members = index == b
        n = int(members.sum())
        entry = {"index": b, "count": n}
        if n >= 1:
            entry["mean_ln_level"] = float(np.mean(np.log(level[members])))
            entry["mean"] = float(np.mean(residual[members]))
        if n >= 2:
            entry["sd"] = float(np.std(residual[members], ddof=1))
        bins.append(entry)
    used = [e for e in bins if e["count"] >= 2 and e["sd"] > 0]
    if len(used) < 3:
        raise SystemExit("fewer than 3 usable bins")
    x = np.array([e["mean_ln_level"] for e in used])
    y = np.log(np.array([e["sd"] for e in used]))
    w = np.array([e["count"] - 1.0 for e in used])
    design = sm.add_constant(x)
    wls = sm.WLS(y, design, weights=w).fit()
    k = float(wls.params[1])
    se_residual = float(wls.bse[1])
    root_w = np.sqrt(w)
    lstsq_params = np.linalg.lstsq(design * root_w[:, None], y * root_w, rcond=None)[0]
    if not math.isclose(k, float(lstsq_params[1]), rel_tol=1e-10, abs_tol=1e-13):
        raise SystemExit(f"statsmodels WLS k {k} and numpy lstsq {lstsq_params[1]} disagree")
    x_bar = np.sum(w * x) / np.sum(w)
    se_model = float(math.sqrt(1.0 / (2.0 * np.sum(w * (x - x_bar) ** 2))))
    return {
        "k": k,
        "k_lstsq": float(lstsq_params[1]),
        "standard_error": max(se_model, se_residual),
        "standard_error_model": se_model,
        "standard_error_residual": se_residual,
        "bins_used": len(used),
    }, bins


def compute():
    feeds = []
    for name in FEEDS:
        path = FEEDS_DIR / f"{name}.csv"
        if not path.exists():
            print(f"{path}: missing (run with --make-feeds)", file=sys.stderr)
            sys.exit(2)
        digest = hashlib.sha256(path.read_bytes()).hexdigest()
        level, residual = read_feed(path)
        positions = bin_positions(level)
        index = bin_indices(positions)
        # Distance of any level to an interior bin edge, in bin widths: a level within
        # rounding of an edge could fall in different bins in two implementations.
        interior = (positions > 0.5) & (positions < BINS - 0.5)
        margin = float(np.min(np.abs(positions[interior] - np.round(positions[interior]))))
        if margin < 1e-9:
            raise SystemExit(f"{path}: a level lies within {margin} bin widths of an edge")
        lm, lm_pvalue = koenker(level, residual)
        fit, bins = exponent(level, residual, index)
        feeds.append(
            {
                "file": f"feeds/{name}.csv",
                "sha256": digest,
                "rows": int(len(level)),
                "min_edge_margin_bins": margin,
                "koenker": {"statistic": lm, "samples": int(len(level)), "p_value": lm_pvalue},
                "exponent": fit,
                "bins": bins,
            }
        )
    return {
        "about": "Reference values for core/src/spread.rs, written by spread_reference.py",
        "sources": {
            "koenker": "statsmodels 0.14.1 statsmodels.stats.diagnostic.het_breuschpagan("
            "resid, add_constant(level), robust=True)[0]",
            "exponent": "statsmodels 0.14.1 WLS(ln sd, add_constant(mean ln level), "
            "weights=n-1).params[1]; cross-checked with numpy 1.26.4 linalg.lstsq",
            "standard_error": "max(sqrt(1/(2*sum w (x - xbar_w)^2)), statsmodels 0.14.1 "
            "WLS bse[1])",
            "bins": "numpy 1.26.4 mean, std(ddof=1)",
        },
        "versions": {
            "python": sys.version.split()[0],
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "pandas": pandas.__version__,
            "patsy": patsy.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "binning": {
            "bins": BINS,
            "level_low": LEVEL_LOW,
            "level_high": LEVEL_HIGH,
            "forgetting": 1.0,
            "variance": "S/(n-1)",
            "weight": "n-1",
        },
        "feeds": feeds,
    }


def compare(expected, actual, where, problems):
    if isinstance(expected, dict) and isinstance(actual, dict):
        for key in sorted(set(expected) | set(actual)):
            if key not in expected or key not in actual:
                problems.append(f"{where}.{key}: present on one side only")
            elif where == "" and key == "versions":
                continue
            else:
                compare(expected[key], actual[key], f"{where}.{key}", problems)
    elif isinstance(expected, list) and isinstance(actual, list):
        if len(expected) != len(actual):
            problems.append(f"{where}: length {len(expected)} vs {len(actual)}")
        for i, (e, a) in enumerate(zip(expected, actual)):
            compare(e, a, f"{where}[{i}]", problems)
    elif isinstance(expected, float) or isinstance(actual, float):
        e, a = float(expected), float(actual)
        if not abs(e - a) <= TOLERANCE * max(abs(e), abs(a)):
            problems.append(f"{where}: committed {e!r}, recomputed {a!r}")
    elif expected != actual:
        problems.append(f"{where}: committed {expected!r}, recomputed {actual!r}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    mode = parser.add_mutually_exclusive_group()
    mode.add_argument("--make-feeds", action="store_true", help="write the feeds first")
    mode.add_argument("--check", action="store_true", help="compare with the committed JSON")
    args = parser.parse_args()
    if args.make_feeds:
        make_feeds()
    actual = compute()
    if args.check:
        if not EXPECTED.exists():
            print(f"{EXPECTED}: missing", file=sys.stderr)
            return 2
        expected = json.loads(EXPECTED.read_text())
        for library, version in expected.get("versions", {}).items():
            if library != "python" and actual["versions"].get(library) != version:
                print(
                    f"warning: {library} {actual['versions'].get(library)} installed, "
                    f"{version} recorded (see requirements.txt)",
                    file=sys.stderr,
                )
        problems = []
        compare(expected, actual, "", problems)
        if problems:
            print("spread reference mismatch:", file=sys.stderr)
            for problem in problems:
                print(f"  {problem}", file=sys.stderr)
            return 1
        print(f"spread reference: {len(actual['feeds'])} feeds agree with {EXPECTED.name}")
        return 0
    EXPECTED.write_text(json.dumps(actual, indent=2) + "\n")
    print(f"wrote {EXPECTED}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
