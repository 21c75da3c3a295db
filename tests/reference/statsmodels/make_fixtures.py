#!/usr/bin/env python3
"""Write the statsmodels/numpy reference fixtures for specgrid's least-squares engine.

Each fixture is one seeded synthetic design (numpy default_rng, fixed seed) plus, for every model
fitted on it, the numbers statsmodels OLS reports: estimates, standard errors under every
covariance choice, t-based p-values and 95% intervals, R², adjusted R², σ², and Koenker's
studentized Breusch-Pagan test. crates/specgrid-ols/tests/reference.rs reads them.

Usage: make_fixtures.py [--out DIR]   (default: the fixtures/ folder next to this script)

Inputs are rounded to 6 decimals *before* fitting, so the decimal text in the JSON parses back to
exactly the doubles statsmodels saw, and the files stay small.
"""

import argparse
import json
import platform
import sys
from pathlib import Path

import numpy as np
import scipy
import statsmodels
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_breuschpagan

CONFIDENCE_LEVEL = 0.95
HC_TYPES = ["HC0", "HC1", "HC2", "HC3"]


def rounded(values):
    """Round to 6 decimals via the decimal text, so JSON text and fitted doubles agree exactly."""
    return np.array([float(f"{v:.6f}") for v in np.asarray(values, dtype=float)])


def cluster_codes(labels):
    """Dense 0..G-1 codes in order of first appearance, as the engine's ClusterIds expects."""
    lookup = {}
    for v in labels.tolist():
        lookup.setdefault(v, len(lookup))
    return np.array([lookup[v] for v in labels.tolist()], dtype=np.int64)


def inference_block(res, label, dims, expected_df):
    """Standard errors, t-based p-values and intervals of one statsmodels fit (use_t=True)."""
    # statsmodels keeps df_resid = n - k and puts the inference df in df_resid_inference for
    # clustered fits (G - 1 one-way, min(G_A, G_B) - 1 two-way); checked against our convention.
    df = float(getattr(res, "df_resid_inference", res.df_resid))
    if df != expected_df:
        raise SystemExit(f"{label}: statsmodels used t df {df}, expected {expected_df}")
    # Recompute the two-sided p-value from t and df to confirm which distribution it used.
    # NaN entries (an indefinite two-way matrix, seen only in the indicator block of
    # make_fixtures_fe.py's designs) are compared as NaN on both sides.
    recomputed = 2.0 * stats.t.sf(np.abs(res.tvalues), df)
    if not np.allclose(recomputed, res.pvalues, rtol=1e-12, atol=0.0, equal_nan=True):
        raise SystemExit(f"{label}: statsmodels p-values are not Student t with df {df}")
    # The whitened design: for OLS it is the design itself; for WLS, √w·x and √w·y, on which
    # statsmodels builds every robust covariance.
    exog, endog = res.model.wexog, res.model.wendog
    groups = res.cov_kwds.get("groups") if dims else None
    textbook = textbook_se(exog, endog, label, None if groups is None else np.asarray(groups))
    if not np.allclose(textbook, res.bse, rtol=1e-9, atol=0.0, equal_nan=True):
        raise SystemExit(f"{label}: statsmodels bse {res.bse} differ from the formula {textbook}")
    ci = np.asarray(res.conf_int(alpha=1.0 - CONFIDENCE_LEVEL))
    return {
        "kind": label,
        "dims": dims,
        "df": df,
        "bse": np.asarray(res.bse).tolist(),
        "tvalues": np.asarray(res.tvalues).tolist(),
        "pvalues": np.asarray(res.pvalues).tolist(),
        "ci_low": ci[:, 0].tolist(),
        "ci_high": ci[:, 1].tolist(),
    }


def textbook_se(exog, endog, kind, groups=None):
    """Standard errors from the handbook formulas, computed directly with numpy.

    Used only to confirm that statsmodels was called the way we think (groups passed, factors
    applied): classical σ²(X'X)⁻¹; HC0-HC3 (White 1980; MacKinnon & White 1985); CR1 with
    G/(G-1)·(n-1)/(n-k) (Cameron & Miller 2015, common practice); two-way V_A + V_B - V_AB, each
    with its own CR1 factor (Cameron, Gelbach & Miller 2011, as statsmodels applies it).
    """
    n, k = exog.shape
    bread = np.linalg.inv(exog.T @ exog)
    resid = endog - exog @ (bread @ exog.T @ endog)
    if kind == "classical":
        return np.sqrt(np.diag(bread) * (resid @ resid) / (n - k))
    if kind.startswith("hc"):
        lev = np.einsum("ij,jk,ik->i", exog, bread, exog)
        weight = {
            "hc0": np.ones(n),
            "hc1": np.full(n, n / (n - k)),
            "hc2": 1.0 / (1.0 - lev),
            "hc3": 1.0 / (1.0 - lev) ** 2,
        }[kind]
        meat = (exog * (weight * resid**2)[:, None]).T @ exog
        return np.sqrt(np.diag(bread @ meat @ bread))

    def cr1(codes):
        g = len(np.unique(codes))
        scores = np.zeros((codes.max() + 1, k))
        np.add.at(scores, codes, exog * resid[:, None])
        factor = g / (g - 1) * (n - 1) / (n - k)
        return factor * bread @ (scores.T @ scores) @ bread

    if kind == "cluster":
        return np.sqrt(np.diag(cr1(groups)))
    a, b = groups[:, 0], groups[:, 1]
    _, both = np.unique(a * (b.max() + 1) + b, return_inverse=True)
    return np.sqrt(np.diag(cr1(a) + cr1(b) - cr1(both)))


def fit_model(x, y, clusters, model):
    """Fit one model with statsmodels under every covariance choice it asks for."""
    cols = model["statsmodels_columns"]
    exog = x[:, cols]
    endog = y[:, model["outcome"]]
    n, k = exog.shape
    ols = sm.OLS(endog, exog)
    base = ols.fit()  # nonrobust; statsmodels uses t with df n - k here by default
    covs = [inference_block(ols.fit(use_t=True), "classical", [], float(n - k))]
    for hc in HC_TYPES:
        covs.append(
            inference_block(ols.fit(cov_type=hc, use_t=True), hc.lower(), [], float(n - k))
        )
    for dims in model.get("cluster_dims", []):
        if len(dims) == 1:
            groups = clusters[dims[0]]["codes"]
            g = len(np.unique(groups))
            res = ols.fit(cov_type="cluster", cov_kwds={"groups": groups}, use_t=True)
            covs.append(inference_block(res, "cluster", dims, float(g - 1)))
        else:
            # An n x 2 groups array gives Cameron-Gelbach-Miller two-way: V_A + V_B - V_AB,
            # each term with its own CR1 factor (checked by textbook_se above).
            groups = np.column_stack([clusters[d]["codes"] for d in dims])
            g = min(len(np.unique(groups[:, 0])), len(np.unique(groups[:, 1])))
            res = ols.fit(cov_type="cluster", cov_kwds={"groups": groups}, use_t=True)
            covs.append(inference_block(res, "two_way_cluster", dims, float(g - 1)))

    out = {
        "label": model["label"],
        "columns": model["columns"],
        "outcome": model["outcome"],
        "statsmodels_columns": cols,
        "expected_dropped": model.get("expected_dropped", []),
        "has_constant": bool(base.k_constant),
        "nobs": float(base.nobs),
        "df_resid": float(base.df_resid),
        "params": np.asarray(base.params).tolist(),
        "rsquared": float(base.rsquared),
        "rsquared_adj": float(base.rsquared_adj),
        "scale": float(base.scale),
        "resid_sd": float(np.sqrt(base.scale)),
        "covariances": covs,
        "breusch_pagan": None,
    }
    if base.k_constant:
        # Koenker's studentized form (robust=True): LM = n * R² of e² on the regressors,
        # chi-square with (regressors - 1) df.
        # het_breuschpagan insists on an explicit constant column; a model whose constant is
        # only implicit (indicators for every level) gets the same column space rewritten with
        # one ("bp_columns"), which leaves n * R² unchanged.
        bp_exog = x[:, model["bp_columns"]] if "bp_columns" in model else exog
        if np.linalg.matrix_rank(np.column_stack([bp_exog, exog])) != k:
            raise SystemExit(f"{model['label']}: bp_columns do not span the model's columns")
        lm, lm_p, _, _ = het_breuschpagan(base.resid, bp_exog, robust=True)
        out["breusch_pagan"] = {"lm": float(lm), "p_value": float(lm_p), "df": float(k - 1)}
    return out


def heteroskedastic():
    """n = 500, five regressors + constant, noise sd grows with x1; four models, two outcomes."""
    seed = 20261201
    rng = np.random.default_rng(seed)
    n = 500
    x1 = rng.uniform(0.0, 10.0, n)
    x2 = rng.normal(0.0, 1.0, n)
    x3 = 5.0 + 0.4 * x1 + rng.normal(0.0, 2.0, n)
    x4 = (rng.uniform(size=n) < 0.4).astype(float)
    x5 = rng.lognormal(0.0, 0.5, n)
    e1 = rng.normal(0.0, 1.0, n) * (0.5 + 0.3 * x1)
    y1 = 2.0 + 0.5 * x1 - 0.3 * x2 + 0.05 * x3 + 0.8 * x4 + 0.0 * x5 + e1
    e2 = rng.normal(0.0, 1.0, n) * (0.2 + 0.4 * np.abs(x2))
    y2 = 1.0 - 0.2 * x2 + 0.1 * x5 + e2
    x = np.column_stack([np.ones(n), x1, x2, x3, x4, x5])
    y = np.column_stack([y1, y2])
    models = [
        {"label": "all_regressors", "columns": [0, 1, 2, 3, 4, 5], "outcome": 0},
        # A subset in a shuffled order: checks that per-model columns come out of the union
        # factor in the model's own order.
        {"label": "subset_reordered", "columns": [2, 0, 4, 1], "outcome": 0},
        {"label": "second_outcome", "columns": [0, 2, 5], "outcome": 1},
        # No constant column: statsmodels then reports the uncentred R².
        {"label": "no_constant", "columns": [1, 2], "outcome": 0},
    ]
    return {
        "case": "heteroskedastic",
        "description": "Noise sd 0.5 + 0.3*x1; x3 correlated with x1; x5 has a true zero slope.",
        "seed": seed,
        "x_names": ["const", "x1", "x2", "x3", "x4", "x5"],
        "y_names": ["y1", "y2"],
        "x": x,
        "y": y,
        "clusters": [],
        "models": models,
    }


def one_way(case, seed, n_clusters, size_low, size_high):
    """Clusters of random size with a cluster-level shock and a cluster-level regressor."""
    rng = np.random.default_rng(seed)
    sizes = rng.integers(size_low, size_high + 1, n_clusters)
    labels = np.repeat(np.arange(n_clusters), sizes)
    n = len(labels)
    shock = rng.normal(0.0, 1.0, n_clusters)
    level = rng.normal(0.0, 1.0, n_clusters)
    x1 = level[labels] + rng.normal(0.0, 1.0, n)
    x2 = rng.normal(0.0, 1.0, n)
    x3 = rng.normal(2.0, 1.0, n_clusters)[labels]
    x4 = rng.uniform(-1.0, 1.0, n)
    y = 1.0 + 0.4 * x1 - 0.2 * x2 + 0.3 * x3 + 0.0 * x4 + shock[labels] + rng.normal(0.0, 1.0, n)
    # Shuffle rows so that clusters are not contiguous blocks.
    perm = rng.permutation(n)
    labels, x1, x2, x3, x4, y = (a[perm] for a in (labels, x1, x2, x3, x4, y))
    x = np.column_stack([np.ones(n), x1, x2, x3, x4])
    models = [
        {"label": "all_regressors", "columns": [0, 1, 2, 3, 4], "outcome": 0, "cluster_dims": [[0]]},
        {"label": "without_x3", "columns": [0, 1, 2, 4], "outcome": 0, "cluster_dims": [[0]]},
    ]
    return {
        "case": case,
        "description": f"{n_clusters} clusters of {size_low}-{size_high} rows; cluster shock sd 1; "
        "x3 constant within cluster; rows shuffled.",
        "seed": seed,
        "x_names": ["const", "x1", "x2", "x3", "x4"],
        "y_names": ["y"],
        "x": x,
        "y": y[:, None],
        "clusters": [{"name": "group", "labels": labels}],
        "models": models,
    }


def unbalanced_cells(rng, units, periods, keep):
    """Unit and period labels of an unbalanced panel: each cell kept with probability `keep`,
    and a kept cell doubled with probability 0.1."""
    u_lab, p_lab = [], []
    for u in range(units):
        for p in range(periods):
            if rng.uniform() < keep:
                copies = 2 if rng.uniform() < 0.10 else 1
                u_lab += [u] * copies
                p_lab += [p] * copies
    return np.array(u_lab), np.array(p_lab)


def two_way_panel():
    """40 units x 25 periods, about 15% of cells missing and 10% doubled, unit and period shocks."""
    seed = 20261203
    rng = np.random.default_rng(seed)
    units, periods = 40, 25
    u_lab, p_lab = unbalanced_cells(rng, units, periods, 0.85)
    n = len(u_lab)
    u_shock = rng.normal(0.0, 1.0, units)
    p_shock = rng.normal(0.0, 0.8, periods)
    x1 = rng.normal(0.0, 1.0, units)[u_lab] + rng.normal(0.0, 1.0, periods)[p_lab] + rng.normal(0.0, 1.0, n)
    x2 = rng.normal(0.0, 1.0, n)
    x3 = rng.uniform(0.0, 3.0, units)[u_lab]
    y = 0.5 + 0.6 * x1 + 0.1 * x2 - 0.4 * x3 + u_shock[u_lab] + p_shock[p_lab] + rng.normal(0.0, 1.0, n)
    perm = rng.permutation(n)
    u_lab, p_lab, x1, x2, x3, y = (a[perm] for a in (u_lab, p_lab, x1, x2, x3, y))
    x = np.column_stack([np.ones(n), x1, x2, x3])
    dims = [[0], [1], [0, 1]]
    models = [
        {"label": "all_regressors", "columns": [0, 1, 2, 3], "outcome": 0, "cluster_dims": dims},
        {"label": "without_x3", "columns": [0, 1, 2], "outcome": 0, "cluster_dims": dims},
    ]
    return {
        "case": "two_way_panel",
        "description": "40 units x 25 periods, unbalanced (85% of cells kept, 10% of kept cells "
        "doubled), unit shock sd 1, period shock sd 0.8; rows shuffled.",
        "seed": seed,
        "x_names": ["const", "x1", "x2", "x3"],
        "y_names": ["y"],
        "x": x,
        "y": y[:, None],
        "clusters": [{"name": "unit", "labels": u_lab}, {"name": "period", "labels": p_lab}],
        "models": models,
    }


def redundant_indicator(case="redundant_indicator"):
    """Intercept plus an indicator for every level of a 4-level categorical: one column too many.

    Case `indicators_span_constant` fits the same data with the indicators before the constant,
    so the constant column is the one dropped; the kept columns still span the constant, and
    statsmodels (which detects the implicit constant) reports the centred R² and BP df k - 1.
    """
    seed = 20261204
    rng = np.random.default_rng(seed)
    n = 400
    level = rng.integers(0, 4, n)
    d = np.zeros((n, 4))
    d[np.arange(n), level] = 1.0
    x1 = rng.normal(0.0, 1.0, n)
    x2 = rng.uniform(0.0, 5.0, n)
    groups = rng.integers(0, 25, n)
    effect = np.array([0.0, 0.5, -0.3, 1.2])
    y = 1.0 + effect[level] + 0.7 * x1 - 0.1 * x2 + rng.normal(0.0, 1.0, 25)[groups] * 0.5
    y = y + rng.normal(0.0, 1.0, n) * (0.5 + 0.2 * x2)
    x = np.column_stack([np.ones(n), d, x1, x2])
    models = [
        # Engine gets all seven columns and must drop level_3 (column 4), the later of the
        # collinear set in model order; statsmodels gets the design without it.
        {
            "label": "constant_first",
            "columns": [0, 1, 2, 3, 4, 5, 6],
            "statsmodels_columns": [0, 1, 2, 3, 5, 6],
            "expected_dropped": [4],
            "outcome": 0,
            "cluster_dims": [[0]],
        },
    ]
    if case == "indicators_span_constant":
        models = [
            {
                "label": "indicators_first",
                "columns": [1, 2, 3, 4, 0, 5, 6],
                "statsmodels_columns": [1, 2, 3, 4, 5, 6],
                "bp_columns": [0, 1, 2, 3, 5, 6],
                "expected_dropped": [0],
                "outcome": 0,
                "cluster_dims": [[0]],
            },
        ]
    return {
        "case": case,
        "description": "Constant + indicators for all 4 levels (sum to the constant) + x1, x2; "
        "noise sd 0.5 + 0.2*x2 and a 25-group shock.",
        "seed": seed,
        "x_names": ["const", "level_0", "level_1", "level_2", "level_3", "x1", "x2"],
        "y_names": ["y"],
        "x": x,
        "y": y[:, None],
        "clusters": [{"name": "group", "labels": groups}],
        "models": models,
    }


def build(case):
    """Round the inputs, fit every model and assemble the JSON document."""
    x = np.column_stack([rounded(c) for c in case["x"].T])
    y = np.column_stack([rounded(c) for c in case["y"].T])
    clusters = []
    for c in case["clusters"]:
        codes = cluster_codes(np.asarray(c["labels"]))
        clusters.append({"name": c["name"], "codes": codes, "count": int(codes.max()) + 1})
    models = []
    for m in case["models"]:
        m = dict(m)
        m.setdefault("statsmodels_columns", m["columns"])
        models.append(fit_model(x, y, clusters, m))
    return {
        "source": "statsmodels OLS via tests/reference/statsmodels/make_fixtures.py",
        "versions": {
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "statsmodels": statsmodels.__version__,
        },
        "case": case["case"],
        "description": case["description"],
        "seed": case["seed"],
        "confidence_level": CONFIDENCE_LEVEL,
        "n": int(x.shape[0]),
        "x_names": case["x_names"],
        "y_names": case["y_names"],
        # Column-major: one list per column.
        "x": [col.tolist() for col in x.T],
        "y": [col.tolist() for col in y.T],
        "clusters": [
            {"name": c["name"], "count": c["count"], "codes": c["codes"].tolist()} for c in clusters
        ],
        "models": models,
    }


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent / "fixtures")
    args = parser.parse_args()
    args.out.mkdir(parents=True, exist_ok=True)
    cases = [
        heteroskedastic(),
        one_way("cluster_30", 20261202, 30, 10, 30),
        one_way("cluster_200", 20261205, 200, 2, 6),
        two_way_panel(),
        redundant_indicator(),
        redundant_indicator("indicators_span_constant"),
    ]
    write_fixtures(args.out, (build(case) for case in cases))


def write_fixtures(out, docs):
    """Write each fixture document as compact JSON to OUT/<case>.json."""
    for doc in docs:
        path = out / f"{doc['case']}.json"
        with open(path, "w") as f:
            json.dump(doc, f, indent=None, separators=(",", ":"))
            f.write("\n")
        print(f"wrote {path} ({path.stat().st_size // 1024} KB, {doc['n']} rows)", file=sys.stderr)


if __name__ == "__main__":
    main()
