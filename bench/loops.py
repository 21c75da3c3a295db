"""The two reference loops a practitioner would write: statsmodels OLS per model, and numpy
least squares with hand-written HC1 and CR1. Each returns, per model, the tracked terms'
estimates and standard errors under the grid's covariance choices, keyed like specgrid's
models.csv: (model_id, errors, term).

Favourable to the loops, and said so in the output: the data are read, every term's column
computed and each sample's rows and cluster codes found once, before the loop (a practitioner
rebuilding them per model would be slower), and statsmodels fits each model once and derives
every covariance choice from that one fit.
"""

import time

import numpy as np
import statsmodels.api as sm

from studies import term_columns


class Prepared:
    """The data frame, its term columns computed once, and cluster codes per column."""

    def __init__(self, frame, grid):
        self.frame = frame
        self.grid = grid
        self.cache = {}
        self.outcomes = {f: outcome_column(frame[grid.outcome].to_numpy(np.float64), f)
                         for f in grid.outcome_forms}
        present = np.ones(len(frame), dtype=bool)
        for column in grid.needed_columns():
            present &= frame[column].notna().to_numpy()
        self.present = present
        self.codes = {c: frame[c].astype(str).to_numpy() for c in grid.clusters}
        self.samples = {}

    def sample_rows(self, sample):
        """Rows of a sample under the shared-row rule and its cluster codes, computed once."""
        if sample not in self.samples:
            rows = self.present.copy()
            mask = self.grid.sample_mask(self.frame, sample)
            if mask is not None:
                rows &= mask
            codes = {c: np.unique(v[rows], return_inverse=True)[1] for c, v in self.codes.items()}
            self.samples[sample] = (rows, codes)
        return self.samples[sample]

    def columns(self, term):
        if term not in self.cache:
            self.cache[term] = term_columns(self.frame, term)
        return self.cache[term]


def outcome_column(y, form):
    forms = {"level": lambda: y, "log": lambda: np.log(y), "asinh": lambda: np.arcsinh(y),
             "log1p": lambda: np.log1p(y)}
    return forms[form]()


def model_design(prep, choices, sample):
    """(X, y, tracked [(index, label)], rows, cluster codes) of one model."""
    outcome, terms = prep.grid.model_terms(choices)
    rows, codes = prep.sample_rows(sample)
    columns = [np.ones(int(rows.sum()))]
    tracked = []
    for term, label in terms:
        for j, col in enumerate(prep.columns(term)):
            if label is not None:
                labels = label if isinstance(label, list) else [label]
                tracked.append((len(columns), labels[j] if j < len(labels) else label))
            columns.append(col[rows])
    # Categorical columns can repeat across chosen blocks only if the study lists a term twice;
    # this suite's blocks are disjoint, so the design has full column rank.
    x = np.column_stack(columns)
    y = prep.outcomes[outcome][rows]
    return x, y, tracked, codes


def statsmodels_model(x, y, tracked, codes, errors):
    """One statsmodels OLS fit; every covariance choice from it."""
    res = sm.OLS(y, x).fit()
    out = {}
    for label in errors:
        if label == "classical":
            r = res
        elif label.startswith("hc"):
            r = res.get_robustcov_results(cov_type=label.upper())
        else:
            # statsmodels' default cluster correction is CR1: G/(G-1)·(n-1)/(n-k) (methods.md).
            r = res.get_robustcov_results(cov_type="cluster", groups=codes[label[len("cluster:"):]])
        for index, term in tracked:
            out[(label, term)] = (float(r.params[index]), float(r.bse[index]))
    return out


def numpy_model(x, y, tracked, codes, errors):
    """numpy lstsq for the coefficients; the bread from the R of a QR (accurate where the
    normal equations would square the condition number); HC1 and CR1 written out.
    Formulas: HC1 = n/(n−k)·(X'X)⁻¹ X'diag(e²)X (X'X)⁻¹ (MacKinnon & White 1985);
    CR1 = G/(G−1)·(n−1)/(n−k)·(X'X)⁻¹ Σ_g s_g s_g' (X'X)⁻¹, s_g = Σ_{i∈g} xᵢeᵢ
    (Cameron & Miller 2015, J. Human Resources 50, eq. 11 with the small-sample factor)."""
    n, k = x.shape
    b, *_ = np.linalg.lstsq(x, y, rcond=None)
    e = y - x @ b
    r_inv = np.linalg.inv(np.linalg.qr(x, mode="r"))
    bread = r_inv @ r_inv.T
    out = {}
    for label in errors:
        if label == "classical":
            v = bread * (e @ e) / (n - k)
        elif label == "hc1":
            xe = x * e[:, None]
            v = bread @ (xe.T @ xe) @ bread * n / (n - k)
        elif label.startswith("cluster:"):
            g_codes = codes[label[len("cluster:"):]]
            g = int(g_codes.max()) + 1
            xe = x * e[:, None]
            sums = np.column_stack([np.bincount(g_codes, weights=xe[:, j], minlength=g) for j in range(k)])
            v = bread @ (sums.T @ sums) @ bread * g / (g - 1) * (n - 1) / (n - k)
        else:
            raise SystemExit(f"the numpy loop has no formula for `{label}`")
        for index, term in tracked:
            out[(label, term)] = (float(b[index]), float(np.sqrt(v[index, index])))
    return out


LOOPS = {"statsmodels": statsmodels_model, "numpy": numpy_model}


def run_loop(kind, prep, models, n_obs):
    """Runs one loop over `models` [(model_id, choices, sample)]; returns (values, seconds).
    `n_obs` maps model id to specgrid's row count, checked against the loop's rows."""
    fit = LOOPS[kind]
    values = {}
    start = time.perf_counter()
    for model_id, choices, sample in models:
        x, y, tracked, codes = model_design(prep, choices, sample)
        if x.shape[0] != n_obs[model_id]:
            raise SystemExit(f"{model_id}: the {kind} loop has {x.shape[0]} rows, specgrid {n_obs[model_id]}")
        for (label, term), pair in fit(x, y, tracked, codes, prep.grid.errors).items():
            values[(model_id, label, term)] = pair
    return values, time.perf_counter() - start
