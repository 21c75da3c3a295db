#!/usr/bin/env bash
# Regenerate the statsmodels reference fixtures with live PyPI libraries and compare them,
# number by number (relative 1e-10), with the committed ones. CI calls this.
# The virtualenv lives at $SPECGRID_VENV (default /root/.cache/specgrid/venv); it is created
# if missing and brought to the pinned versions in requirements.txt.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
venv="${SPECGRID_VENV:-/root/.cache/specgrid/venv}"

if [[ ! -x "$venv/bin/python" ]]; then
    echo "check_live: creating virtualenv at $venv" >&2
    python3 -m venv "$venv"
fi
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check -r "$here/requirements.txt"

live="$(mktemp -d)"
trap 'rm -rf "$live"' EXIT

"$venv/bin/python" "$here/make_fixtures.py" --out "$live"
"$venv/bin/python" "$here/compare.py" "$here/fixtures" "$live" --rtol 1e-10

# The effects fixture: the data set must come out byte for byte, the expected effects to 1e-10.
mkdir -p "$live/effects"
"$venv/bin/python" "$here/make_effect_fixtures.py" --out "$live/effects"
cmp "$here/effects/data.csv" "$live/effects/data.csv"
"$venv/bin/python" "$here/compare.py" "$here/effects" "$live/effects" --rtol 1e-10

# The inference fixtures (wild cluster bootstrap enumeration, Gelbach, Oster inputs).
mkdir -p "$live/inference"
"$venv/bin/python" "$here/../inference/make_fixtures.py" --out "$live/inference"
"$venv/bin/python" "$here/compare.py" "$here/../inference/fixtures" "$live/inference" --rtol 1e-10
