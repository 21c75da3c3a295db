"""The comparison suite: specgrid against the loops a practitioner would write, on the same data
and grid. Called by bench/run.sh (which builds the binary and the floor bench first); see the
"Comparison suite" section of docs/performance.md.

For each scenario: generate the data into the work folder, write the study, run specgrid with
/usr/bin/time -v at 1 and 2 threads (wall time, peak resident set, `--timings` phases), run the
statsmodels loop and the numpy loop on a stated subset of the same models and scale their time
up, check that both loops agree with specgrid (relative 1e-8) on every model they ran, and print
ratios. Everything measured goes to WORK/results.json.
"""

import argparse
import json
import math
import os
import re
import resource
import subprocess
import sys
import time

import numpy as np
import pandas as pd

from compare import RELATIVE_TOLERANCE, compare, specgrid_values
from loops import Prepared, run_loop
from studies import SMALL_MODELS, region_table, small_models_grid, wide_grid

SCALES = {
    # rows of the wide table (4 seasons), models drawn, reference-loop subsets, growth sweeps
    "small": dict(wide_rows=100_000, wide_models=200, wide_subset=10, small_full=False, small_subset=300,
                  growth_rows=[10_000, 100_000, 1_000_000], growth_models=[100, 1_000, 3_000],
                  growth_fixed_models=50, growth_fixed_rows=10_000, growth_models_at_large_rows=[]),
    "full": dict(wide_rows=1_000_000, wide_models=10_000, wide_subset=8, small_full=True, small_subset=1_000,
                 growth_rows=[10_000, 100_000, 1_000_000, 10_000_000],
                 growth_models=[100, 1_000, 10_000, 100_000, 1_000_000],
                 growth_fixed_models=200, growth_fixed_rows=10_000,
                 # At 10^6 rows a few hundred models stay on the row pass (a moment build costs
                 # more than they do); these counts show the moment route taking over.
                 growth_models_at_large_rows=[2_000, 10_000]),
}
SEASONS = 4


def log(text):
    print(text, flush=True)


def run_specgrid(binary, study, out, threads, extra=()):
    """Runs `specgrid run` under /usr/bin/time -v; returns wall s, peak RSS MiB and phases."""
    cmd = ["/usr/bin/time", "-v", binary, "run", study, "--out", out, "--threads", str(threads),
           "--quiet", "--timings", *extra]
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        raise SystemExit(f"specgrid failed ({proc.returncode}) on {study}:\n{proc.stderr[-3000:]}")
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (\S+)", proc.stderr).group(1)
    seconds = sum(float(part) * 60**i for i, part in enumerate(reversed(wall.split(":"))))
    rss_kib = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", proc.stderr).group(1))
    line = next(l for l in proc.stderr.splitlines() if l.startswith("timings "))
    phases = {k: float(v) for k, v in (kv.split("=") for kv in line.split()[1:])}
    return {"threads": threads, "wall_s": seconds, "peak_rss_mib": rss_kib / 1024, "phases": phases}


def demo_data(binary, rows, path):
    plots = rows // SEASONS
    subprocess.run([binary, "demo-data", "--plots", str(plots), "--seasons", str(SEASONS), "--out", path],
                   check=True, capture_output=True)


def specgrid_models(out_dir, grid):
    """models.csv of a run, and per model (choices, sample, n_obs)."""
    frame = pd.read_csv(os.path.join(out_dir, "models.csv"), dtype={"model_id": str})
    dims = ["outcome", "focus"] + [name for name, _ in grid.decisions]
    first = frame.drop_duplicates("model_id").sort_values("model_id")
    models = []
    n_obs = {}
    for _, row in first.iterrows():
        choices = {d: str(row[d]) for d in dims}
        sample = str(row["sample"]) if "sample" in frame.columns else None
        models.append((row["model_id"], choices, sample))
        n_obs[row["model_id"]] = int(row["n_obs"])
    return frame, models, n_obs


def evenly(models, count):
    """`count` models spread evenly over the id-sorted list (a stated, reproducible subset)."""
    if count >= len(models):
        return list(models)
    step = len(models) / count
    return [models[int(i * step)] for i in range(count)]


def reference_loops(prep, frame, models, n_obs, subset, total_models, load_s):
    """Both loops on the subset, checked against specgrid; times scaled to the whole grid."""
    chosen = evenly(models, subset)
    ours = specgrid_values(frame, [m for m, _, _ in chosen])
    out = {}
    for kind in ("statsmodels", "numpy"):
        values, seconds = run_loop(kind, prep, chosen, n_obs)
        worst, compared, problems = compare(values, ours)
        if problems:
            raise SystemExit(f"{kind} loop and specgrid disagree (relative {RELATIVE_TOLERANCE:g}):\n"
                             + "\n".join(problems[:20]))
        per_model = seconds / len(chosen)
        out[kind] = {
            "models_run": len(chosen), "seconds_run": seconds, "seconds_per_model": per_model,
            "data_prep_s": load_s, "scaled_total_s": load_s + per_model * total_models,
            "values_compared": compared, "worst_relative_difference": worst,
        }
        log(f"  {kind:11s}: {len(chosen)} of {total_models:,} models in {seconds:.2f} s "
            f"({per_model * 1e3:.2f} ms/model) -> scaled to all: {out[kind]['scaled_total_s']:.1f} s; "
            f"agrees with specgrid on {compared} values, worst relative difference {worst:.1e}")
    return out


def scenario_wide(args, scale, work):
    log(f"\n== wide: {scale['wide_rows']:,} rows, {scale['wide_models']:,} models, HC1 + cluster by village ==")
    parquet, csv = os.path.join(work, "wide.parquet"), os.path.join(work, "wide.csv")
    demo_data(args.bin, scale["wide_rows"], parquet)
    demo_data(args.bin, scale["wide_rows"], csv)  # the same seed: the same values, for pandas
    grid = wide_grid("wide.parquet", sample=scale["wide_models"])
    return run_scenario(args, "wide", grid, work, csv_reader=lambda: pd.read_csv(csv, dtype={"season": str}),
                        subset=scale["wide_subset"])


def scenario_small_models(args, scale, work):
    full = scale["small_full"]
    log(f"\n== many small models: 150 rows, 60 candidate regressors (3 always in, every set of 3 of the "
        f"other 57), {SMALL_MODELS[full]:,} models, classical + HC1 ==")
    csv = os.path.join(work, "regions.csv")
    region_table().to_csv(csv, index=False, float_format="%.4f")
    grid = small_models_grid("regions.csv", full)
    # The issue asks for the 2,000,000 models' results streamed to Parquet in chunks.
    extra = ["--chunk", "200000"] if full else []
    result = run_scenario(args, "small-models", grid, work, csv_reader=lambda: pd.read_csv(csv),
                          subset=scale["small_subset"], extra=extra)
    if full:
        # The same run writing the results table as Parquet only (`--no-csv`): the issue's
        # 2,000,000-model target is stated for results streamed to Parquet.
        study = os.path.join(work, "small-models.toml")
        out = os.path.join(work, "small-models-results-parquet-only")
        r = run_specgrid(args.bin, study, out, 2, extra + ["--no-csv"])
        result["specgrid_parquet_only"] = r
        log(f"  specgrid 2 thread(s), --no-csv: {r['wall_s']:.2f} s wall, peak RSS {r['peak_rss_mib']:.0f} MiB, "
            + " ".join(f"{k}={v:.2f}" for k, v in r["phases"].items()))
    return result


def run_scenario(args, name, grid, work, csv_reader, subset, extra=()):
    study = os.path.join(work, f"{name}.toml")
    with open(study, "w") as f:
        f.write(grid.toml())
    runs = {}
    for threads in (1, 2):
        out = os.path.join(work, f"{name}-results-t{threads}")
        runs[threads] = run_specgrid(args.bin, study, out, threads, extra)
        r = runs[threads]
        log(f"  specgrid {threads} thread(s): {r['wall_s']:.2f} s wall, peak RSS {r['peak_rss_mib']:.0f} MiB, "
            + " ".join(f"{k}={v:.2f}" for k, v in r["phases"].items()))
    frame, models, n_obs = specgrid_models(os.path.join(work, f"{name}-results-t2"), grid)
    start = time.perf_counter()
    prep = Prepared(csv_reader(), grid)
    load_s = time.perf_counter() - start
    loops = reference_loops(prep, frame, models, n_obs, subset, len(models), load_s)
    best = runs[2]["wall_s"]
    result = {
        "models": len(models), "rows_used": max(n_obs.values()), "specgrid": runs, "loops": loops,
        "ratios": {k: v["scaled_total_s"] / best for k, v in loops.items()},
        # Phases under 10 ms on both runs (e.g. no inference phase) have no meaningful ratio.
        "thread_speedup": {p: safe_ratio(runs[1]["phases"][p], runs[2]["phases"][p]) for p in runs[1]["phases"]
                           if max(runs[1]["phases"][p], runs[2]["phases"][p]) >= 0.01},
    }
    result["thread_speedup"]["wall"] = safe_ratio(runs[1]["wall_s"], runs[2]["wall_s"])
    return result


def safe_ratio(a, b):
    return a / b if b > 0 else math.nan


def scenario_growth(args, scale, work):
    log("\n== cost growth: time versus rows and versus models (wide grid, HC1 + cluster, 2 threads) ==")
    table = []
    sweeps = [("rows", r, scale["growth_fixed_models"]) for r in scale["growth_rows"]]
    sweeps += [("models", scale["growth_fixed_rows"], m) for m in scale["growth_models"]]
    sweeps += [("models", 1_000_000, m) for m in scale["growth_models_at_large_rows"]]
    for sweep, rows, models in sweeps:
        data = os.path.join(work, f"growth-{rows}.parquet")
        if not os.path.exists(data):
            demo_data(args.bin, rows, data)
        extra = 0 if models <= 10_240 else math.ceil(models / 10_240)
        grid = wide_grid(os.path.basename(data), sample=models, extra_samples=extra)
        study = os.path.join(work, f"growth-{sweep}-{rows}-{models}.toml")
        with open(study, "w") as f:
            f.write(grid.toml())
        # Past 200,000 models the results are written in chunks, as the scenarios are.
        chunked = ["--chunk", "200000"] if models > 200_000 else []
        r = run_specgrid(args.bin, study, os.path.join(work, "growth-results"), 2, chunked)
        samples = max(1, len(grid.samples))
        ph = r["phases"]
        row = {"sweep": sweep, "rows": rows, "models": models, "samples": samples, **r,
               "fixed_per_sample_s": (ph["load"] + ph["factor"]) / samples,
               "marginal_per_model_ms": ph["fit"] / models * 1e3}
        table.append(row)
        log(f"  {sweep:6s} rows={rows:>10,} models={models:>9,} samples={samples:>3} wall={r['wall_s']:8.2f} s "
            f"load={ph['load']:.2f} factor={ph['factor']:.2f} fit={ph['fit']:.2f} write={ph['write']:.2f} "
            f"report={ph['report']:.2f}  fixed/sample={row['fixed_per_sample_s']:.3f} s  "
            f"per model={row['marginal_per_model_ms']:.3f} ms  RSS={r['peak_rss_mib']:.0f} MiB")
    return table


def read_floor(path):
    floor = {}
    if path and os.path.exists(path):
        for line in open(path):
            m = re.match(r"floor threads=(\d+) seconds=(\S+) gflops=(\S+)", line)
            if m:
                floor[int(m.group(1))] = {"seconds": float(m.group(2)), "gflops": float(m.group(3))}
    return floor


def fit_gflops(run, rows, columns, models, tracked):
    """Rough rate of the fit phase: per model the row pass does about 2·n·p flops for the
    residuals and 2·n·p per tracked coefficient for the influence weights (docs/methods.md,
    "Batched row pass"); the small per-model QRs are left out, so this is a lower bound."""
    fit = run["phases"]["fit"]
    return 2.0 * rows * columns * (1 + tracked) * models / fit / 1e9 if fit > 0 else math.nan


def summary(results, floor, scale_name):
    log("\n== summary (this machine is shared with other engineers' builds; read ratios, not seconds) ==")
    for t, f in sorted(floor.items()):
        log(f"  floor: faer product 100,000 x 40 times 40 x 2,000 on {t} thread(s): {f['gflops']:.1f} GFLOP/s")
    targets = {"wide": dict(wall=45, statsmodels=200, numpy=30, rss_mib=4096), "small-models": dict(wall=20)}
    for name in ("wide", "small-models"):
        if name not in results:
            continue
        r = results[name]
        two = r["specgrid"][2]
        log(f"  {name}: {r['models']:,} models; specgrid {two['wall_s']:.2f} s on 2 threads "
            f"({r['specgrid'][1]['wall_s']:.2f} s on 1), peak RSS {two['peak_rss_mib']:.0f} MiB")
        if scale_name == "full" and "rss_mib" in targets[name]:
            t = targets[name]
            log(f"    end to end {two['wall_s']:.1f} s (target under {t['wall']} s: "
                f"{'met' if two['wall_s'] < t['wall'] else 'NOT met'}), peak RSS {two['peak_rss_mib']:.0f} MiB "
                f"(target under {t['rss_mib']} MiB: {'met' if two['peak_rss_mib'] < t['rss_mib'] else 'NOT met'})")
        if "specgrid_parquet_only" in r:
            wall = r["specgrid_parquet_only"]["wall_s"]
            verdict = "" if scale_name != "full" else (
                "  target met" if wall <= targets[name]["wall"] else f"  target {targets[name]['wall']} s NOT met")
            log(f"    results as Parquet only (--no-csv): {wall:.2f} s on 2 threads{verdict}")
        for kind, ratio in r["ratios"].items():
            target = targets[name].get(kind)
            verdict = "" if target is None or scale_name != "full" else (
                "  target met" if ratio >= target else f"  target {target}x NOT met")
            log(f"    {kind} loop (scaled from {r['loops'][kind]['models_run']} models) / specgrid: {ratio:,.1f}x{verdict}")
        log("    speed-up 1 -> 2 threads: " + ", ".join(f"{k} {v:.2f}x" for k, v in r["thread_speedup"].items()))
    if "wide" in results and 2 in floor:
        rows = results["wide"]["rows_used"]
        g = fit_gflops(results["wide"]["specgrid"][2], rows, 38, results["wide"]["models"], 1.8)
        log(f"  wide fit phase: {g:.1f} GFLOP/s in row-pass-equivalent flops, {g / floor[2]['gflops']:.0%} of the "
            "2-thread floor (rough count of what a row pass per model would do; above 100% means the "
            "covariance sums came from the union's moments, which do not pass over the rows per model)")
        results["wide"]["fit_gflops_estimate"] = g


def main():
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--scale", choices=sorted(SCALES), default="small")
    parser.add_argument("--scenario", choices=["all", "wide", "small-models", "growth"], default="all")
    parser.add_argument("--bin", required=True, help="the release specgrid binary")
    parser.add_argument("--work", required=True, help="temp folder for data, studies and results")
    parser.add_argument("--floor", help="output of the floor bench")
    args = parser.parse_args()
    scale = SCALES[args.scale]
    log(f"comparison suite, scale {args.scale}, work folder {args.work}; load average {os.getloadavg()[0]:.1f}")
    log("reference loops: the data are read and each term's column computed once before the loop, statsmodels "
        "derives every covariance choice from one fit per model, and each loop runs a stated, evenly spread "
        "subset of the models; its time per model is scaled to the whole grid (data preparation added once)")
    results = {"scale": args.scale, "load_average_start": os.getloadavg(), "floor": read_floor(args.floor)}
    if args.scenario in ("all", "wide"):
        results["wide"] = scenario_wide(args, scale, args.work)
    if args.scenario in ("all", "small-models"):
        results["small-models"] = scenario_small_models(args, scale, args.work)
    if args.scenario in ("all", "growth"):
        results["growth"] = scenario_growth(args, scale, args.work)
    results["load_average_end"] = os.getloadavg()
    results["python_peak_rss_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    summary(results, results["floor"], args.scale)
    path = os.path.join(args.work, "results.json")
    with open(path, "w") as f:
        json.dump(results, f, indent=2, default=str)
    log(f"\nmachine-readable results: {path}")


if __name__ == "__main__":
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    main()
