#!/usr/bin/env bash
# The comparison suite: specgrid against a statsmodels loop and a numpy loop on the same data
# and grid. See the "Comparison suite" section of docs/performance.md.
#
#   bash bench/run.sh [--scale small|full] [--scenario all|wide|small-models|growth] [--keep]
#
# Builds the release binary and the floor bench, generates the data into a temp folder (never
# committed), runs every scenario and prints ratios; results.json lands in the temp folder,
# which is removed at the end unless --keep is given.
# Environment: CARGO_TARGET_DIR (default: $HOME/.cache/specgrid/target),
# SPECGRID_PYTHON (default: $HOME/.cache/specgrid/venv/bin/python, with the packages of
# tests/reference/statsmodels/requirements.txt).
set -euo pipefail

scale=small
scenario=all
keep=0
while [[ $# -gt 0 ]]; do
  case "$1" in
    --scale) scale="${2:?--scale needs small or full}"; shift 2 ;;
    --scenario) scenario="${2:?--scenario needs a name}"; shift 2 ;;
    --keep) keep=1; shift ;;
    -h|--help) sed -n '2,13p' "$0"; exit 0 ;;
    *) echo "bench/run.sh: unknown argument '$1'; see --help" >&2; exit 2 ;;
  esac
done

repo="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$HOME/.cache/specgrid/target}"
python="${SPECGRID_PYTHON:-$HOME/.cache/specgrid/venv/bin/python}"
[[ -x "$python" ]] || { echo "bench/run.sh: no Python at $python; set SPECGRID_PYTHON to a venv with tests/reference/statsmodels/requirements.txt" >&2; exit 2; }
[[ -x /usr/bin/time ]] || { echo "bench/run.sh: /usr/bin/time is needed for peak memory (Debian package 'time')" >&2; exit 2; }

work="$(mktemp -d "${TMPDIR:-/tmp}/specgrid-bench.XXXXXX")"
if [[ $keep -eq 0 ]]; then trap 'rm -rf "$work"' EXIT; fi

cd "$repo"
echo "building (release, workspace features; see DEVELOPERS.md) ..."
cargo build --release --workspace --quiet
echo "the agreement check's own tests ..."
"$python" -m unittest discover -s bench -p 'test_*.py' 2>&1 | tail -1
echo "machine floor: faer matrix product ..."
if ! cargo bench -p specgrid-ols --bench floor --quiet >"$work/floor.txt" 2>"$work/floor.err"; then
  echo "bench/run.sh: the floor bench failed:" >&2; tail -20 "$work/floor.err" >&2; exit 1
fi
cat "$work/floor.txt"

# One BLAS thread for the loops: on this shared 2-core machine a 2-thread BLAS was 5x slower
# on a 10,000 x 20 lstsq; specgrid is reported at 1 and at 2 threads.
OPENBLAS_NUM_THREADS=1 OMP_NUM_THREADS=1 MKL_NUM_THREADS=1 \
  "$python" bench/suite.py --scale "$scale" --scenario "$scenario" --bin "$CARGO_TARGET_DIR/release/specgrid" \
  --work "$work" --floor "$work/floor.txt"
if [[ $keep -eq 1 ]]; then echo "kept: $work"; fi
