#!/usr/bin/env python3
"""Reference values for specgrid's inference-across-the-grid methods (crates/specgrid-ols/src/inference).

Written independently of the Rust code, by brute force where possible:

* wild cluster bootstrap-t: every Rademacher (2^G) or Webb (6^G) weight vector is enumerated, the
  bootstrap outcome is built from the restricted fit, and the model is refitted with
  numpy.linalg.lstsq and its CR1 standard error recomputed from the residuals row by row (no
  shortcut algebra); the CR1 error of the original fit is also taken from statsmodels.
* Gelbach (2016): Gamma by numpy.linalg.lstsq of each added column on the base columns, the full
  model's covariance from statsmodels (nonrobust, HC1, cluster), contributions and their
  standard errors by the textbook formulas.
* Oster (2019): every input (short/long estimates and R^2, var(y), var(x), tau_x) from raw data
  with numpy, delta for beta = 0 from the closed form (written from memory, like the Rust side),
  and beta* for delta = 1 from numpy.roots of the cubic.

Inputs are rounded to 6 decimals before use, so the JSON text parses back to the same doubles.
Usage: make_fixtures.py [--out DIR]   (default: fixtures/ next to this script)
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

TIE_SLACK = 1e-10  # same tie rule as the Rust side: the all-ones draw counts as extreme
WEBB = [-np.sqrt(1.5), -1.0, -np.sqrt(0.5), np.sqrt(0.5), 1.0, np.sqrt(1.5)]


def rounded(a):
    return np.array([float(f"{v:.6f}") for v in np.asarray(a, dtype=float).ravel()]).reshape(
        np.shape(a)
    )


def ols(X, y):
    b, *_ = np.linalg.lstsq(X, y, rcond=None)
    return b, y - X @ b


def cr1_se(X, e, codes, j):
    """CR1 standard error of coefficient j, row by row."""
    n, k = X.shape
    G = len(np.unique(codes))
    bread = np.linalg.inv(X.T @ X)
    meat = np.zeros((k, k))
    for g in np.unique(codes):
        s = X[codes == g].T @ e[codes == g]
        meat += np.outer(s, s)
    V = G / (G - 1) * (n - 1) / (n - k) * bread @ meat @ bread
    return np.sqrt(V[j, j])


def wild_p(X, y, codes, j, beta0, points):
    """Brute-force wild cluster bootstrap-t p-value with the null beta_j = beta0 imposed."""
    G = codes.max() + 1
    b, e = ols(X, y)
    t = (b[j] - beta0) / cr1_se(X, e, codes, j)
    Xr = np.delete(X, j, axis=1)
    yr = y - beta0 * X[:, j]
    br, ur = ols(Xr, yr) if Xr.shape[1] else (np.zeros(0), yr.copy())
    fitted = y - ur
    hits, total = 0, 0
    for v in itertools.product(points, repeat=G):
        v = np.array(v)
        ystar = fitted + ur * v[codes]
        bs, es = ols(X, ystar)
        ts = (bs[j] - beta0) / cr1_se(X, es, codes, j)
        hits += abs(ts) >= abs(t) * (1 - TIE_SLACK)
        total += 1
    return float(hits / total), int(total), float(t)


def wild_case(rng, name, G, sizes, points_name, betas):
    codes = np.repeat(np.arange(G), sizes)
    rng.shuffle(codes)
    n = len(codes)
    shock = rng.normal(size=G)
    x1 = rounded(rng.normal(size=n) + 0.8 * rng.normal(size=G)[codes])
    x2 = rounded(rng.normal(size=n))
    y = rounded(0.5 + 0.25 * x1 - 0.4 * x2 + shock[codes] + rng.normal(size=n) * (1 + 0.5 * np.abs(x1)))
    X = np.column_stack([np.ones(n), x1, x2])
    points = [1.0, -1.0] if points_name == "rademacher" else WEBB
    b, e = ols(X, y)
    res = sm.OLS(y, X).fit(cov_type="cluster", cov_kwds={"groups": codes})
    sm_se = float(res.bse[1])
    assert abs(sm_se - cr1_se(X, e, codes, 1)) < 1e-10 * sm_se
    tests = []
    for beta0 in betas:
        p, total, t = wild_p(X, y, codes, 1, beta0, points)
        tests.append({"null_value": beta0, "p_value": p, "t_stat": t, "draws": total})
    return {
        "case": name,
        "weights": points_name,
        "x": [list(map(float, c)) for c in X.T],
        "y": list(map(float, y)),
        "codes": list(map(int, codes)),
        "clusters": G,
        "focus": 1,
        "estimate": float(b[1]),
        "cr1_std_error_statsmodels": sm_se,
        "tests": tests,
    }


def gelbach_case(rng):
    n, G = 240, 24
    codes = np.arange(n) % G
    rng.shuffle(codes)
    z = rng.normal(size=(n, 5))
    focus = rounded(z[:, 0])
    base_ctl = rounded(0.5 * z[:, 0] + z[:, 1])
    a1 = rounded(0.6 * z[:, 0] + z[:, 2])
    a2 = rounded(-0.3 * z[:, 0] + 0.5 * z[:, 1] + z[:, 3])
    b1 = rounded(0.4 * z[:, 0] + z[:, 4] + 0.5 * rng.normal(size=G)[codes])
    y = rounded(1 + 0.3 * focus + 0.2 * base_ctl + 0.5 * a1 - 0.7 * a2 + 0.9 * b1
                + rng.normal(size=n) * (1 + 0.3 * np.abs(focus)) + rng.normal(size=G)[codes])
    cols = [np.ones(n), focus, base_ctl, a1, a2, b1]
    X = np.column_stack(cols)
    base = [0, 1, 2]
    blocks = {"block_a": [3, 4], "block_b": [5]}
    added = [3, 4, 5]
    full = base + added
    Xb, Xf = X[:, base], X[:, full]
    b_base, _ = ols(Xb, y)
    b_full, _ = ols(Xf, y)
    gamma = np.array([ols(Xb, X[:, c])[0][1] for c in added])  # focus is base position 1
    beta2 = b_full[len(base):]
    out = {"n": n, "x": [list(map(float, c)) for c in X.T], "y": list(map(float, y)),
           "codes": list(map(int, codes)), "clusters": G, "base": base, "focus": 1,
           "blocks": [{"name": k, "columns": v} for k, v in blocks.items()],
           "base_estimate": float(b_base[1]), "full_estimate": float(b_full[1]),
           "total_change": float(b_base[1] - b_full[1]), "gamma": list(map(float, gamma)),
           "covariances": {}}
    fits = {
        "classical": sm.OLS(y, Xf).fit(),
        "hc1": sm.OLS(y, Xf).fit(cov_type="HC1"),
        "cluster": sm.OLS(y, Xf).fit(cov_type="cluster", cov_kwds={"groups": codes}),
    }
    for name, res in fits.items():
        V = np.asarray(res.cov_params())[len(base):, len(base):]
        entry = {"blocks": []}
        start = 0
        for cols_ in blocks.values():
            idx = list(range(start, start + len(cols_)))
            start += len(cols_)
            g = gamma[idx]
            entry["blocks"].append({"contribution": float(g @ beta2[idx]),
                                    "std_error": float(np.sqrt(g @ V[np.ix_(idx, idx)] @ g))})
        entry["total_std_error"] = float(np.sqrt(gamma @ V @ gamma))
        out["covariances"][name] = entry
    return out


def oster_case(rng):
    n = 300
    w1 = rng.normal(size=n)
    w2 = rng.normal(size=n)
    x = rounded(0.7 * w1 + 0.5 * w2 + rng.normal(size=n))
    w1, w2 = rounded(w1), rounded(w2)
    y = rounded(2 + 0.4 * x + 0.8 * w1 + 0.6 * w2 + rng.normal(size=n) * 1.5)
    one = np.ones(n)
    short_X = np.column_stack([one, x])
    long_X = np.column_stack([one, x, w1, w2])

    def fit(X):
        b, e = ols(X, y)
        return b[1], 1 - (e @ e) / np.sum((y - y.mean()) ** 2)

    bs, rs = fit(short_X)
    bl, rl = fit(long_X)
    var_y = np.mean((y - y.mean()) ** 2)
    var_x = np.mean((x - x.mean()) ** 2)
    _, xres = ols(np.column_stack([one, w1, w2]), x)
    tau = np.mean(xres ** 2)
    rmax = 1.3 * rl
    db, dr, drm = bs - bl, rl - rs, rmax - rl
    nu = bl  # beta = 0
    num = nu * dr * var_y * tau + nu * var_x * tau * db**2 + 2 * nu**2 * tau * db * var_x \
        + nu**3 * (tau * var_x - tau**2)
    den = drm * var_y * db * var_x + nu * drm * var_y * (var_x - tau) + nu**2 * tau * db * var_x \
        + nu**3 * (tau * var_x - tau**2)
    delta = 1.0
    A = (delta - 1) * (tau * var_x - tau**2)
    B = (delta - 2) * tau * db * var_x
    C = delta * drm * var_y * (var_x - tau) - dr * var_y * tau - var_x * tau * db**2
    D = delta * drm * var_y * db * var_x
    roots = np.roots([A, B, C, D] if A != 0 else [B, C, D])
    real = sorted(float(bl - r.real) for r in roots if abs(r.imag) < 1e-12)
    return {"n": n, "x": [list(map(float, c)) for c in long_X.T], "y": list(map(float, y)),
            "short_columns": [0, 1], "long_columns": [0, 1, 2, 3], "focus": 1,
            "short_estimate": float(bs), "short_r2": float(rs), "long_estimate": float(bl),
            "long_r2": float(rl), "var_y": float(var_y), "var_x": float(var_x),
            "var_x_resid": float(tau), "r_max": float(rmax), "delta_for_zero": float(num / den),
            "beta_star_roots": real, "beta_star_approx": float(bl - db * drm / dr)}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--out", default=str(Path(__file__).parent / "fixtures"))
    args = ap.parse_args()
    rng = np.random.default_rng(20261201)
    doc = {
        "source": "tests/reference/inference/make_fixtures.py",
        "versions": {"python": platform.python_version(), "numpy": np.__version__,
                     "scipy": scipy.__version__, "statsmodels": statsmodels.__version__},
        "wild_cluster": [
            wild_case(rng, "rademacher_8_clusters", 8, rng.integers(6, 14, size=8), "rademacher",
                      [0.0, 0.25, 0.6]),
            wild_case(rng, "webb_4_clusters", 4, rng.integers(8, 16, size=4), "webb", [0.0, 0.25]),
        ],
        "gelbach": gelbach_case(rng),
        "oster": oster_case(rng),
    }
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    (out / "inference.json").write_text(json.dumps(doc, indent=1) + "\n")


if __name__ == "__main__":
    main()
