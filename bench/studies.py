"""The suite's grids, written once and used twice: as a plain TOML study for specgrid
(docs/study-file.md) and as numpy columns for the reference loops, so both sides fit the same
models on the same rows.

A term is a tuple: ("num", column, form) with form level, log, log1p, asinh, pow2 or pow3;
("cat", column) for indicators of every level but the first in sorted order; ("prod", a, b) for
the product of two numeric terms.
"""

import numpy as np

FORM_TOML = {
    "level": '"level"',
    "log": '"log"',
    "log1p": '"log1p"',
    "asinh": '"asinh"',
    "quadratic": '"quadratic"',
}


def term_toml(term):
    """The term as a TOML value."""
    kind = term[0]
    if kind == "num":
        _, column, form = term
        if form == "level":
            return f'"{column}"'
        if form.startswith("pow"):
            raise ValueError("single powers enter only through focus forms in this suite")
        return f'{{ column = "{column}", form = {FORM_TOML[form]} }}'
    if kind == "cat":
        return f'{{ categorical = "{term[1]}" }}'
    if kind == "prod":
        return f"{{ product = [{term_toml(term[1])}, {term_toml(term[2])}] }}"
    raise ValueError(f"unknown term {term!r}")


def numeric_column(frame, column, form):
    """One transformed column as float64, exactly as docs/study-file.md defines the form."""
    x = frame[column].to_numpy(dtype=np.float64)
    if form == "level":
        return x
    if form == "log":
        return np.log(x)
    if form == "log1p":
        return np.log1p(x)
    if form == "asinh":
        return np.arcsinh(x)
    if form.startswith("pow"):
        return x ** int(form[3:])
    raise ValueError(f"unknown form {form}")


def term_columns(frame, term):
    """The design columns of one term, as a list of float64 arrays."""
    kind = term[0]
    if kind == "num" and term[2] == "quadratic":
        x = numeric_column(frame, term[1], "level")
        return [x, x**2]
    if kind == "num":
        return [numeric_column(frame, term[1], term[2])]
    if kind == "cat":
        values = frame[term[1]].astype(str).to_numpy()
        levels = sorted(set(values.tolist()))
        return [(values == level).astype(np.float64) for level in levels[1:]]
    if kind == "prod":
        (a,), (b,) = term_columns(frame, term[1]), term_columns(frame, term[2])
        return [a * b]
    raise ValueError(f"unknown term {term!r}")


def source_columns(term):
    """Data columns a term reads."""
    if term[0] == "prod":
        return source_columns(term[1]) + source_columns(term[2])
    return [term[1]]


class Pick:
    """A `role = "pick"` block: every set of `size` of `terms` (docs/study-file.md). Its options
    are named by the terms' labels joined with " + ", so `terms_of` maps a name back."""

    def __init__(self, terms, size):
        self.terms, self.size = terms, size
        self.by_label = {term_label(t): t for t in terms}

    def toml(self):
        return ['role = "pick"', "terms = [" + ", ".join(term_toml(t) for t in self.terms) + "]",
                f"size = {self.size}"]

    def all_terms(self):
        return list(self.terms)

    def terms_of(self, option):
        return [self.by_label[label] for label in option.split(" + ")]


def term_label(term):
    """specgrid's label of a term in option names; only level columns are needed here."""
    if term[0] == "num" and term[2] == "level":
        return term[1]
    raise ValueError(f"no label rule for {term!r} in this suite")


class Grid:
    """One study: outcome forms, focus forms (name -> [(term, label)]), control decisions, errors.

    `decisions` is a list of (decision name, {option name: [terms]} or a `Pick`) in file order;
    a decision whose options are exactly "out" and "in" is written as an optional block, any
    other dict as an alternatives block. `always` terms enter every model.
    """

    def __init__(self, title, data, outcome, outcome_forms, focus, focus_forms, always, decisions,
                 errors, clusters, sample=None, limit=100_000, samples=None):
        self.title, self.data = title, data
        self.outcome, self.outcome_forms = outcome, outcome_forms
        self.focus, self.focus_forms = focus, focus_forms
        self.always, self.decisions = always, decisions
        self.errors, self.clusters = errors, clusters
        self.sample, self.limit = sample, limit
        self.samples = samples or []

    def toml(self):
        """The study file text."""
        lines = [
            "# Written by bench/suite.py for the comparison suite; see docs/performance.md.",
            "[study]",
            f'title = "{self.title}"',
            f'data = "{self.data}"',
            "seed = 20261202",
            'rows = "shared"',
            "",
            "[outcome]",
            f'column = "{self.outcome}"',
            "forms = [" + ", ".join(f'"{f}"' for f in self.outcome_forms) + "]",
            "",
            "[focus]",
            f'column = "{self.focus}"',
            "forms = [" + ", ".join(focus_form_toml(name) for name in self.focus_forms) + "]",
            "",
        ]
        if self.always:
            lines += ["[[controls]]", 'name = "always in"', 'role = "always"',
                      "terms = [" + ", ".join(term_toml(t) for t in self.always) + "]", ""]
        for name, options in self.decisions:
            lines += ["[[controls]]", f'name = "{name}"']
            if isinstance(options, Pick):
                lines += options.toml() + [""]
            elif set(options) == {"out", "in"}:
                lines += ['role = "optional"',
                          "terms = [" + ", ".join(term_toml(t) for t in options["in"]) + "]", ""]
            else:
                lines += ['role = "alternatives"', "options = ["]
                for option, terms in options.items():
                    joined = ", ".join(term_toml(t) for t in terms)
                    lines.append(f'  {{ name = "{option}", terms = [{joined}] }},')
                lines += ["]", ""]
        for name, keep, _ in self.samples:
            lines += ["[[samples]]", f'name = "{name}"']
            if keep:
                lines.append(f"keep = [{keep}]")
            lines.append("")
        lines += ["[errors]", "choices = [" + ", ".join(map(error_toml, self.errors)) + "]", "", "[grid]",
                  f"limit = {self.limit}"]
        if self.sample is not None:
            lines.append(f"sample = {self.sample}")
        return "\n".join(lines) + "\n"

    def needed_columns(self):
        """Every data column some model reads (the shared-row rule drops rows missing any)."""
        terms = list(self.always)
        for _, options in self.decisions:
            if isinstance(options, Pick):
                terms += options.all_terms()
                continue
            for option_terms in options.values():
                terms += option_terms
        cols = {self.outcome, self.focus}
        for t in terms:
            cols.update(source_columns(t))
        return sorted(cols)

    def sample_mask(self, frame, name):
        """Rows of the named sample (None = every row), before the shared-row rule."""
        for sample, _, mask in self.samples:
            if sample == name:
                return None if mask is None else mask(frame)
        if self.samples:
            raise SystemExit(f"sample `{name}` is not in the suite's grid")
        return None

    def model_terms(self, choices):
        """(outcome form, [(term, label or None)]) of one model from its option names."""
        terms = [(t, label) for t, label in FOCUS_FORMS[choices["focus"]](self.focus)]
        terms += [(t, None) for t in self.always]
        for name, options in self.decisions:
            chosen = options.terms_of(choices[name]) if isinstance(options, Pick) else options[choices[name]]
            terms += [(t, None) for t in chosen]
        return choices["outcome"], terms


def error_toml(label):
    """A covariance choice, given by its results label (`hc1`, `cluster:village`), as TOML."""
    if label.startswith("cluster:"):
        return f'{{ cluster = "{label[len("cluster:"):]}" }}'
    return f'"{label}"'


def focus_form_toml(name):
    """Focus forms by option name; `cubic` is a named polynomial of degree 3."""
    return {"cubic": '{ polynomial = 3, name = "cubic" }'}.get(name, f'"{name}"')


FOCUS_FORMS = {
    "level": lambda c: [(("num", c, "level"), c)],
    "log1p": lambda c: [(("num", c, "log1p"), f"log1p({c})")],
    "asinh": lambda c: [(("num", c, "asinh"), f"asinh({c})")],
    "quadratic": lambda c: [(("num", c, "level"), c), (("num", c, "pow2"), f"{c}^2")],
    "cubic": lambda c: [(("num", c, "level"), c), (("num", c, "pow2"), f"{c}^2"),
                        (("num", c, "pow3"), f"{c}^3")],
}


def wide_grid(data, sample, extra_samples=0):
    """The wide scenario on the orchard demo data: 2 outcome forms × 5 focus forms × 2^10
    optional blocks = 10,240 models; the union design has 38 columns (intercept, 5 focus
    columns, 32 control columns with 4 seasons) and 2 outcome columns."""
    num = lambda c, f="level": ("num", c, f)  # noqa: E731
    blocks = [
        ("plot size", [num("area_ha"), num("area_ha", "log")]),
        ("tree age", [num("tree_age", "quadratic")]),
        ("soil", [num("soil_ph"), ("prod", num("soil_ph"), num("slope_pct"))]),
        ("terrain", [num("slope_pct"), num("slope_pct", "log1p"), ("prod", num("slope_pct"), num("area_ha"))]),
        ("grower", [num("experience_yrs"), num("experience_yrs", "log1p"),
                    ("prod", num("experience_yrs"), num("tree_age"))]),
        ("irrigation", [num("irrigated"), ("prod", num("irrigated"), num("area_ha")),
                        ("prod", num("irrigated"), num("slope_pct"))]),
        ("organic", [num("organic"), ("prod", num("organic"), num("tree_age")),
                     ("prod", num("organic"), num("experience_yrs"))]),
        ("variety", [("cat", "variety")]),
        ("district", [("cat", "district")]),
        ("season", [("cat", "season")]),
    ]
    samples = None
    if extra_samples:
        # Extra row sets multiply the grid for the cost-growth sweep over model counts.
        samples = [("all plots", "", None)] + [
            (f"slope at most {limit:.1f}", f'{{ column = "slope_pct", at_most = {limit:.1f} }}',
             lambda f, limit=limit: f["slope_pct"].to_numpy() <= limit)
            for limit in (40 - i * 0.1 for i in range(extra_samples))
        ]
    return Grid(
        title="Comparison suite: wide orchard grid",
        data=data,
        outcome="yield_t_ha",
        outcome_forms=["level", "log"],
        focus="visits",
        focus_forms=["level", "log1p", "asinh", "quadratic", "cubic"],
        always=[],
        decisions=[(name, {"out": [], "in": terms}) for name, terms in blocks],
        errors=["hc1", "cluster:village"],
        clusters=["village"],
        sample=sample,
        limit=2_000_000,
        samples=samples,
    )


def small_models_grid(data, full):
    """The issue's many-small-models scenario on the 150-region table: 60 candidate regressors,
    of which the focus and 2 controls are always in, and every set of 3 of the other 57 (one
    `pick` block, C(57, 3) = 29,260 models). At full scale two outcome forms and 35 row sets
    (all regions, and each of regions 1–34 left out) make 29,260 × 70 = 2,048,200."""
    measures = [("num", f"measure_{i:02d}", "level") for i in range(1, 58)]
    samples = None
    if full:
        samples = [("all regions", "", None)] + [
            (f"without region {r}", f'{{ column = "region_no", not_equals = {r} }}',
             lambda f, r=r: f["region_no"].to_numpy() != r)
            for r in range(1, SMALL_LEAVE_OUT + 1)
        ]
    return Grid(
        title="Comparison suite: many small models",
        data=data,
        outcome="growth_pct",
        outcome_forms=["level", "asinh"] if full else ["level"],
        focus="adviser_density",
        focus_forms=["level"],
        always=[("num", "rainfall_index", "level"), ("num", "market_access", "level")],
        decisions=[("measures", Pick(measures, 3))],
        errors=["classical", "hc1"],
        clusters=[],
        limit=3_000_000,
        samples=samples,
    )


# Regions left out one at a time at full scale: 2 outcomes × (1 + 34) samples × 29,260 sets.
SMALL_LEAVE_OUT = 34
SMALL_MODELS = {False: 29_260, True: 29_260 * 2 * (1 + SMALL_LEAVE_OUT)}


def region_table(seed=20261202, rows=150):
    """The invented 150-region table (a pandas frame): growth of orchard output per region,
    adviser density (the focus), two always-in controls and 57 candidate measures, some
    correlated through two common factors. Invented; never a check value."""
    import pandas as pd

    rng = np.random.default_rng(seed)
    common = rng.standard_normal((rows, 2))
    data = {"region_no": np.arange(1, rows + 1)}
    data["adviser_density"] = np.round(2.0 + 0.5 * common[:, 0] + 0.4 * rng.standard_normal(rows), 4)
    data["rainfall_index"] = np.round(rng.standard_normal(rows), 4)
    data["market_access"] = np.round(0.6 * common[:, 1] + 0.8 * rng.standard_normal(rows), 4)
    for i in range(1, 58):
        loading = rng.uniform(-0.6, 0.6, 2)
        data[f"measure_{i:02d}"] = np.round(common @ loading + rng.standard_normal(rows), 4)
    growth = (1.0 + 0.8 * data["adviser_density"] + 0.5 * data["rainfall_index"]
              + 0.3 * data["measure_03"] - 0.4 * data["measure_25"] + rng.standard_normal(rows))
    data["growth_pct"] = np.round(growth, 4)
    return pd.DataFrame(data)
