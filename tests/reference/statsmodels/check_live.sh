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
"$venv/bin/python" "$here/make_fixtures_fe.py" --out "$live"
"$venv/bin/python" "$here/compare.py" "$here/fixtures" "$live" --rtol 1e-10
