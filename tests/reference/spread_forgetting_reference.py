#!/usr/bin/env python3
"""Reference values for steadycal's streaming spread profile with forgetting factor 0.999,
from general-purpose libraries at pinned versions (tests/reference/requirements.txt).

The core's profile (core/src/spread.rs) multiplies every bin and the Koenker sums by the
forgetting factor beta on each push. After N pushes residual i (0-based) therefore carries the
weight w_i = beta**(N - 1 - i). This script computes the same statistics directly from those
weights, in batch (no streaming), on the stored feeds tests/reference/feeds/*.csv:

  - per bin (16 bins equally spaced in ln level on [1, 1000], the same index arithmetic as
    spread_reference.py): W = sum w, weighted mean of the residual and of ln level,
    S = sum w (x - mean)^2, SD = sqrt(S / (W - 1));
  - exponent k: statsmodels WLS of ln SD on the bin's mean ln level, weights W - 1, over bins
    with W >= 2 and SD > 0; its standard error max(sqrt(1/(2 sum w (x - xbar_w)^2)),
    statsmodels bse);
  - Koenker: n R^2 with n = (sum w)^2 / sum w^2 (Kish) and R^2 of statsmodels WLS of e^2 on
    [1, level] with weights w (the weighted squared correlation).

Modes: (default) write tests/reference/spread_forgetting_expected.json; --check recompute
and compare (1e-10 relative), exit 1 on a mismatch.
"""

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

from spread_reference import BINS, FEEDS, FEEDS_DIR, bin_indices, bin_positions, read_feed

HERE = Path(__file__).resolve().parent
EXPECTED = HERE / "spread_forgetting_expected.json"
BETA = 0.999
TOLERANCE = 1e-10


def compute_feed(level, residual):
    n = len(level)
    w = BETA ** np.arange(n - 1, -1, -1, dtype=float)
    index = bin_indices(bin_positions(level))
    used = []
    for b in range(BINS):
        members = index == b
        wb = w[members]
        W = float(wb.sum())
        if W < 2.0:
            continue
        x = residual[members]
        mean = float(np.sum(wb * x) / W)
        S = float(np.sum(wb * (x - mean) ** 2))
        sd = math.sqrt(S / (W - 1.0))
        if sd > 0:
            used.append((float(np.sum(wb * np.log(level[members])) / W), sd, W))
    x = np.array([u[0] for u in used])
    y = np.log(np.array([u[1] for u in used]))
    weights = np.array([u[2] - 1.0 for u in used])
    fit = sm.WLS(y, sm.add_constant(x), weights=weights).fit()
    x_bar = np.sum(weights * x) / np.sum(weights)
    se_model = math.sqrt(1.0 / (2.0 * np.sum(weights * (x - x_bar) ** 2)))
    aux = sm.WLS(residual ** 2, sm.add_constant(level), weights=w).fit()
    kish = float(w.sum() ** 2 / np.sum(w * w))
    return {
        "k": float(fit.params[1]),
        "standard_error": max(se_model, float(fit.bse[1])),
        "bins_used": len(used),
        "koenker": kish * float(aux.rsquared),
        "koenker_samples": kish,
    }


def compute_all():
    out = {
        "forgetting": BETA,
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__,
                     "statsmodels": statsmodels.__version__},
        "feeds": {},
    }
    for name in FEEDS:
        level, residual = read_feed(FEEDS_DIR / f"{name}.csv")
        out["feeds"][f"feeds/{name}.csv"] = compute_feed(level, residual)
    return out


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true")
    args = parser.parse_args()
    actual = json.loads(json.dumps(compute_all()))
    if not args.check:
        EXPECTED.write_text(json.dumps(actual, indent=1) + "\n")
        print(f"wrote {EXPECTED}")
        return 0
    committed = json.loads(EXPECTED.read_text())
    problems = []
    for feed, values in committed["feeds"].items():
        for key, value in values.items():
            now = actual["feeds"][feed][key]
            if abs(now - value) > TOLERANCE * max(abs(value), 1e-300):
                problems.append(f"{feed} {key}: committed {value!r}, now {now!r}")
    for problem in problems:
        print(problem)
    print(f"{EXPECTED.name}: {'mismatch' if problems else 'ok'}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
