"""Agreement check between specgrid's results and a reference loop (statsmodels or numpy).

Both sides are keyed by (model_id, errors, term). A fast wrong answer does not count, so the
suite stops when any estimate or standard error of a model both sides ran differs by more than
a relative 1e-8, or when a value the reference computed is missing on specgrid's side.
"""

import math

RELATIVE_TOLERANCE = 1e-8


def relative_difference(a, b):
    """|a - b| / max(|a|, |b|); 0 when both are 0, inf when one is not finite."""
    if not (math.isfinite(a) and math.isfinite(b)):
        return 0.0 if a == b else math.inf
    scale = max(abs(a), abs(b))
    return 0.0 if scale == 0.0 else abs(a - b) / scale


def compare(reference, specgrid, tolerance=RELATIVE_TOLERANCE):
    """Compares two dicts {(model_id, errors, term): (estimate, std_error)}.

    Every key of `reference` must be in `specgrid`. Returns (worst relative difference,
    number of values compared, list of problems as text); an empty list means agreement.
    """
    problems = []
    worst = 0.0
    compared = 0
    for key, (ref_est, ref_se) in sorted(reference.items()):
        if key not in specgrid:
            problems.append(f"{key}: computed by the reference loop but missing from specgrid's results")
            continue
        est, se = specgrid[key]
        for what, ours, theirs in (("estimate", est, ref_est), ("std_error", se, ref_se)):
            diff = relative_difference(ours, theirs)
            compared += 1
            worst = max(worst, diff)
            if not diff <= tolerance:
                problems.append(
                    f"{key} {what}: specgrid {ours!r}, reference {theirs!r}, relative difference {diff:.3e}"
                )
    if compared == 0:
        problems.append("no values were compared; the reference loop ran no model of specgrid's results")
    return worst, compared, problems


def specgrid_values(frame, model_ids):
    """{(model_id, errors, term): (estimate, std_error)} from models.csv rows of `model_ids`."""
    wanted = set(model_ids)
    rows = frame[frame["model_id"].isin(wanted)]
    failed = rows[rows["status"] != "ok"]
    if len(failed):
        raise SystemExit(f"specgrid marked models as failed: {failed['model_id'].unique()[:5]}")
    return {
        (m, e, t): (float(b), float(s))
        for m, e, t, b, s in zip(rows["model_id"], rows["errors"], rows["term"], rows["estimate"], rows["std_error"])
    }
