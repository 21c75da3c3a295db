#!/usr/bin/env python3
"""Write statsmodels reference fixtures for absorbed fixed effects and regression weights.

Each case is one seeded synthetic design. statsmodels fits it the long way: OLS or WLS with one
explicit indicator column per level of every effect (minus the redundant ones), under every
covariance choice. The engine absorbs the same effects instead (crates/specgrid-ols/tests/
absorb_reference.rs) and must report the same slope estimates, standard errors, t-based p-values,
intervals, R² (overall: the indicators span the constant) and adjusted R². Clustering dimensions
here never nest an effect, so no degrees-of-freedom rule separates the two sides.

Usage: make_fixtures_fe.py [--out DIR]   (default: the fixtures/ folder next to this script)
"""

import argparse
import platform
from pathlib import Path

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm

from make_fixtures import (
    CONFIDENCE_LEVEL,
    HC_TYPES,
    cluster_codes,
    inference_block,
    rounded,
    unbalanced_cells,
    write_fixtures,
)


def require_psd(v, label):
    """The engine repairs an indefinite two-way matrix (eigenvalues clipped at zero) over the
    coefficients it estimates; statsmodels does not. A fixture is only comparable where that
    block is positive semi-definite, so the seeds were chosen to make it so (checked here)."""
    if np.linalg.eigvalsh(np.asarray(v)).min() < 0.0:
        raise SystemExit(f"{label}: two-way matrix is indefinite; choose another seed")


def covariance_blocks(ols, clusters, model, hc_types, df_resid, compared):
    """Classical, the given HC types and the model's clusterings, each with use_t=True; the
    two-way matrix must be positive semi-definite over the first `compared` coefficients."""
    covs = [inference_block(ols.fit(use_t=True), "classical", [], float(df_resid))]
    for t in hc_types:
        res = ols.fit(cov_type=t, use_t=True)
        covs.append(inference_block(res, t.lower(), [], float(df_resid)))
    for dims in model["cluster_dims"]:
        groups = np.column_stack([clusters[d]["codes"] for d in dims])
        g = min(len(np.unique(groups[:, j])) for j in range(len(dims)))
        if len(dims) == 1:
            groups = groups[:, 0]
        res = ols.fit(cov_type="cluster", cov_kwds={"groups": groups}, use_t=True)
        kind = "cluster" if len(dims) == 1 else "two_way_cluster"
        if len(dims) == 2:
            require_psd(res.cov_params()[:compared, :compared], model["label"])
        covs.append(inference_block(res, kind, dims, float(g - 1)))
    return covs


def indicators(codes, count, skip=()):
    """One 0/1 column per level, leaving out the levels in `skip` (the redundant ones)."""
    keep = [l for l in range(count) if l not in skip]
    return np.column_stack([(codes == l).astype(float) for l in keep])


def fit_model(x, y, clusters, effects, weights, model):
    """statsmodels OLS/WLS on [model columns | indicators] under every covariance choice."""
    cols = model["columns"]
    blocks = [x[:, cols]]
    for e, skip in zip(effects, model["skip_levels"]):
        blocks.append(indicators(e["codes"], e["count"], skip))
    exog = np.column_stack(blocks)
    n, k = exog.shape
    if np.linalg.matrix_rank(exog) != k:
        raise SystemExit(f"{model['label']}: explicit design is rank deficient")
    endog = y[:, model["outcome"]]
    ols = sm.OLS(endog, exog) if weights is None else sm.WLS(endog, exog, weights=weights["values"])
    base = ols.fit()
    if not base.k_constant:
        raise SystemExit(f"{model['label']}: statsmodels did not see the implicit constant")
    covs = covariance_blocks(ols, clusters, model, HC_TYPES, n - k, len(cols))
    m = len(cols)
    for c in covs:
        for key in ("bse", "tvalues", "pvalues", "ci_low", "ci_high"):
            c[key] = c[key][:m]
            if not np.all(np.isfinite(c[key])):
                raise SystemExit(f"{model['label']} {c['kind']}: slope {key} not finite")
    return {
        "label": model["label"],
        "columns": cols,
        "outcome": model["outcome"],
        "explicit_columns": int(k),
        "nobs": float(base.nobs),
        "df_resid": float(base.df_resid),
        "params": np.asarray(base.params)[:m].tolist(),
        "rsquared": float(base.rsquared),
        "rsquared_adj": float(base.rsquared_adj),
        "resid_sd": float(np.sqrt(base.scale)),
        "covariances": covs,
    }


def panel(seed, units, periods, two_way, weighted):
    """Unbalanced panel: each unit x period cell kept with prob. 0.8, doubled with prob. 0.1."""
    rng = np.random.default_rng(seed)
    u_lab, p_lab = unbalanced_cells(rng, units, periods, 0.8)
    n = len(u_lab)
    u_eff = rng.normal(0.0, 1.0, units)
    p_eff = rng.normal(0.0, 0.7, periods)
    x1 = u_eff[u_lab] + 0.5 * p_eff[p_lab] + rng.normal(0.0, 1.0, n)
    x2 = rng.normal(0.0, 1.0, n)
    noise = rng.normal(0.0, 1.0, n) * (0.5 + np.abs(x2))
    y = 0.5 * x1 - 0.3 * x2 + 2.0 * u_eff[u_lab] + p_eff[p_lab] + noise
    g1 = rng.integers(0, 12, n)
    g2 = rng.integers(0, 9, n)
    w = rng.uniform(0.2, 3.0, n)
    perm = rng.permutation(n)
    u_lab, p_lab, x1, x2, y, g1, g2, w = (a[perm] for a in (u_lab, p_lab, x1, x2, y, g1, g2, w))
    effects = [{"name": "unit", "labels": u_lab}]
    if two_way:
        effects.append({"name": "period", "labels": p_lab})
    return {
        "x": np.column_stack([np.ones(n), x1, x2]),
        "y": y[:, None],
        "x_names": ["one", "x1", "x2"],
        "y_names": ["y"],
        "clusters": [{"name": "g1", "labels": g1}, {"name": "g2", "labels": g2}],
        "effects": effects,
        "weights": {"name": "plot_area", "kind": "analytic", "values": w} if weighted else None,
    }


def case(name, seed, description, units, periods, two_way, weighted):
    """One fixture case: the panel plus its models."""
    c = panel(seed, units, periods, two_way, weighted)
    # Unit indicators all kept; the first period indicator is redundant with them (connected).
    skip = [[], [0]] if two_way else [[]]
    c.update(
        case=name,
        seed=seed,
        description=description,
        models=[
            {"label": "x1_x2", "columns": [1, 2], "outcome": 0, "skip_levels": skip,
             "cluster_dims": [[0], [0, 1]]},
            {"label": "x1_only", "columns": [1], "outcome": 0, "skip_levels": skip,
             "cluster_dims": [[1]]},
        ],
    )
    return c


def weighted_only():
    """WLS without effects: constant + regressors, analytic weights, every covariance choice."""
    c = panel(20261213, 30, 10, False, True)
    c["effects"] = []
    c.update(
        case="wls_no_effects",
        seed=20261213,
        description="WLS (analytic weights uniform on [0.2, 3]) on an unbalanced 30 x 10 panel, "
        "no absorbed effects; constant, x1, x2.",
        models=[
            {"label": "with_constant", "columns": [0, 1, 2], "outcome": 0, "skip_levels": [],
             "cluster_dims": [[0], [0, 1]]},
            {"label": "no_constant", "columns": [1, 2], "outcome": 0, "skip_levels": [],
             "cluster_dims": [[1]]},
        ],
    )
    return c


def build(c):
    """Round the inputs, code the labels, fit every model and assemble the JSON document."""
    x = np.column_stack([rounded(col) for col in c["x"].T])
    y = np.column_stack([rounded(col) for col in c["y"].T])
    coded = lambda items: [
        {"name": e["name"], "codes": cluster_codes(np.asarray(e["labels"]))} for e in items
    ]
    clusters = coded(c["clusters"])
    effects = coded(c["effects"])
    for e in clusters + effects:
        e["count"] = int(e["codes"].max()) + 1
    weights = None
    if c["weights"] is not None:
        weights = dict(c["weights"], values=rounded(c["weights"]["values"]))
    models = []
    for m in c["models"]:
        if not effects:
            models.append(fit_plain(x, y, clusters, weights, m))
        else:
            models.append(fit_model(x, y, clusters, effects, weights, m))
    as_list = lambda items: [
        {"name": e["name"], "count": e["count"], "codes": e["codes"].tolist()} for e in items
    ]
    return {
        "source": "statsmodels OLS/WLS with explicit indicators via "
        "tests/reference/statsmodels/make_fixtures_fe.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "case": c["case"],
        "description": c["description"],
        "seed": c["seed"],
        "confidence_level": CONFIDENCE_LEVEL,
        "n": int(x.shape[0]),
        "x_names": c["x_names"],
        "y_names": c["y_names"],
        "x": [col.tolist() for col in x.T],
        "y": [col.tolist() for col in y.T],
        "clusters": as_list(clusters),
        "effects": as_list(effects),
        "weights": None
        if weights is None
        else {"name": weights["name"], "kind": weights["kind"], "values": weights["values"].tolist()},
        "models": models,
    }


def fit_plain(x, y, clusters, weights, model):
    """WLS on the model's own columns (no effects)."""
    cols = model["columns"]
    exog = x[:, cols]
    n, k = exog.shape
    endog = y[:, model["outcome"]]
    ols = sm.WLS(endog, exog, weights=weights["values"])
    base = ols.fit()
    covs = covariance_blocks(ols, clusters, model, HC_TYPES, n - k, k)
    return {
        "label": model["label"],
        "columns": cols,
        "outcome": model["outcome"],
        "explicit_columns": int(k),
        "has_constant": bool(base.k_constant),
        "nobs": float(base.nobs),
        "df_resid": float(base.df_resid),
        "params": np.asarray(base.params).tolist(),
        "rsquared": float(base.rsquared),
        "rsquared_adj": float(base.rsquared_adj),
        "resid_sd": float(np.sqrt(base.scale)),
        "covariances": covs,
    }


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "fixtures")
    args = parser.parse_args()
    args.out.mkdir(parents=True, exist_ok=True)
    cases = [
        case("fe_one_way", 20261207, "OLS with explicit unit indicators (40 units x 12 periods, "
             "unbalanced); the engine absorbs the unit effect.", 40, 12, False, False),
        case("fe_two_way", 20261208, "OLS with explicit unit and period indicators (30 units x 10 "
             "periods, unbalanced, connected); the engine absorbs both.", 30, 10, True, False),
        case("fe_one_way_wls", 20261209, "WLS (analytic weights) with explicit unit indicators; "
             "the engine absorbs the unit effect with the same weights.", 40, 12, False, True),
        case("fe_two_way_wls", 20261212, "WLS (analytic weights) with explicit unit and period "
             "indicators; the engine absorbs both with the same weights.", 30, 10, True, True),
        weighted_only(),
    ]
    write_fixtures(args.out, (build(c) for c in cases))


if __name__ == "__main__":
    main()
