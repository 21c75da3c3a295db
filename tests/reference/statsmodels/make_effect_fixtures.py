#!/usr/bin/env python3
"""Write the reference fixture for specgrid's effects on a common scale (`[report] scale`).

One seeded synthetic data set (numpy default_rng; invented numbers, not a check value in
themselves) and, for every model of a small grid, what statsmodels OLS estimates plus the
textbook conversions written out here independently of specgrid:

- the derivative of g(outcome) with respect to the focus, dg/dx = sum_j b_j F_j'(x) + b_xz z
  (chain rule; quadratic: b1 + 2 b2 x; log1p: b / (1 + x); interaction: b_x + b_xz z,
  Brambor, Clark & Golder 2006, Political Analysis 14:63);
- dy/dg = 1 for a level outcome and y for a log outcome;
- marginal effect = dy/dg * dg/dx, semi-elasticity = that / y, elasticity = that * x / y,
  evaluated at the means of the raw focus, raw outcome and moderator (common practice);
- delta-method standard errors sqrt(w' V w) with V from statsmodels' cov_params() under each
  covariance choice (classical, HC1, one-way cluster CR1), and Student t df n - k or G - 1;
- exp(c) - 1 for a log outcome with a focus entering linearly (Halvorsen & Palmquist 1980,
  AER 70:474) and the quadratic's turning point -(b1 + b_xz z) / (2 b2), both with delta-method SEs.

crates/specgrid/tests/effects_reference.rs runs `specgrid run` on the same data with a study for
each scale and compares `effects.csv` with this file.

Usage: make_effect_fixtures.py [--out DIR]   (default: the effects/ folder next to this script)
"""

import argparse
import itertools
import json
import platform
from pathlib import Path

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

SEED = 20261202
N = 240
GROUPS = 12
SCALES = ["marginal effect", "semi-elasticity", "elasticity"]
OUTCOME_FORMS = ["level", "log"]
FOCUS_FORMS = ["level", "log1p", "quadratic"]
MODERATION = ["none", "moderated"]
ERRORS = ["classical", "hc1", "cluster:grp"]


def rounded(values):
    """Round to 6 decimals via the text, so the CSV parses back to exactly the fitted doubles."""
    return np.array([float(f"{v:.6f}") for v in np.asarray(values, dtype=float)])


def make_data():
    rng = np.random.default_rng(SEED)
    grp = np.repeat(np.arange(GROUPS), N // GROUPS)
    x = rng.poisson(3.0, N).astype(float)
    d = (rng.random(N) < 0.4).astype(float)
    w = rounded(rng.normal(0.0, 1.0, N))
    shock = rng.normal(0.0, 0.1, GROUPS)[grp]
    log_y = 1.5 + 0.05 * x - 0.004 * x**2 + 0.08 * d * x + 0.2 * w + shock + rng.normal(0, 0.25, N)
    y = rounded(np.exp(log_y))
    return {"y": y, "x": x, "d": d, "w": w, "grp": grp}


def design(data, focus, moderated):
    x = data["x"]
    cols = [np.ones(N)]
    if focus == "level":
        cols.append(x)
    elif focus == "log1p":
        cols.append(np.log1p(x))
    else:
        cols += [x, x**2]
    cols.append(data["w"])
    if moderated:
        cols += [data["d"], x * data["d"]]
    return np.column_stack(cols)


def effect_weights(focus, moderated, xbar, zbar):
    """(positions of focus terms and interaction in the design, dg/dx weights on them)."""
    if focus == "level":
        pos, w = [1], [1.0]
    elif focus == "log1p":
        pos, w = [1], [1.0 / (1.0 + xbar)]
    else:
        pos, w = [1, 2], [1.0, 2.0 * xbar]
    if moderated:
        pos.append(len(pos) + 3)  # after intercept, focus terms, w, d
        w.append(zbar)
    return pos, np.array(w)


def delta(grad, cov):
    return float(np.sqrt(grad @ cov @ grad))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "effects")
    args = parser.parse_args()
    args.out.mkdir(parents=True, exist_ok=True)
    data = make_data()
    with open(args.out / "data.csv", "w") as f:
        f.write("y,x,d,w,grp\n")
        for i in range(N):
            f.write(f"{data['y'][i]:.6f},{int(data['x'][i])},{int(data['d'][i])},"
                    f"{data['w'][i]:.6f},g{data['grp'][i]:02d}\n")

    xbar, ybar, zbar = data["x"].mean(), data["y"].mean(), data["d"].mean()
    models = []
    for outcome, focus, moderation in itertools.product(OUTCOME_FORMS, FOCUS_FORMS, MODERATION):
        moderated = moderation == "moderated"
        exog = design(data, focus, moderated)
        endog = data["y"] if outcome == "level" else np.log(data["y"])
        n, k = exog.shape
        ols = sm.OLS(endog, exog)
        fits = {
            "classical": ols.fit(use_t=True),
            "hc1": ols.fit(cov_type="HC1", use_t=True),
            "cluster:grp": ols.fit(cov_type="cluster", cov_kwds={"groups": data["grp"]}, use_t=True),
        }
        dfs = {"classical": n - k, "hc1": n - k, "cluster:grp": GROUPS - 1}
        pos, w = effect_weights(focus, moderated, xbar, zbar)
        dy_dg = 1.0 if outcome == "level" else ybar
        factors = {"marginal effect": dy_dg, "semi-elasticity": dy_dg / ybar,
                   "elasticity": dy_dg * xbar / ybar}
        entry = {"outcome": outcome, "focus": focus, "moderation": moderation, "errors": {}}
        for label, res in fits.items():
            b = np.asarray(res.params)[pos]
            cov = np.asarray(res.cov_params())[np.ix_(pos, pos)]
            out = {"df": float(dfs[label]), "scales": {}}
            for scale, factor in factors.items():
                out["scales"][scale] = {
                    "estimate": float(factor * (w @ b)),
                    "std_error": delta(factor * w, cov),
                }
            if outcome == "log" and focus == "level":
                step = np.array([1.0] + ([zbar] if moderated else []))
                c = float(step @ b)
                out["proportional_change"] = {
                    "value": float(np.expm1(c)),
                    "std_error": delta(np.exp(c) * step, cov),
                }
            if focus == "quadratic":
                b1, b2 = b[0], b[1]
                bz, z = (b[2], zbar) if moderated else (0.0, 0.0)
                slope = b1 + bz * z
                grad = [-1.0 / (2 * b2), slope / (2 * b2 * b2)] + ([-z / (2 * b2)] if moderated else [])
                out["turning_point"] = {
                    "value": float(-slope / (2 * b2)),
                    "std_error": delta(np.array(grad), cov),
                }
            entry["errors"][label] = out
        models.append(entry)

    fixture = {
        "source": "statsmodels OLS params and cov_params; conversions by the textbook formulas in this script",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
        "seed": SEED,
        "means": {"x": float(xbar), "y": float(ybar), "d": float(zbar)},
        "models": models,
    }
    with open(args.out / "expected.json", "w") as f:
        json.dump(fixture, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
