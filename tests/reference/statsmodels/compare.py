#!/usr/bin/env python3
"""Compare two folders of reference fixtures value by value.

Usage: compare.py COMMITTED_DIR LIVE_DIR [--rtol 1e-10]

Numbers must agree to the relative tolerance (exact zeros must stay zero), strings, integers and
the shape of every list and object exactly; only the Python version is compared for information. Prints each value that parted, with its JSON path,
and exits 1 if any did; exits 2 if a file is missing on either side.
"""

import argparse
import json
import math
import sys
from pathlib import Path


# The interpreter is not pinned (the libraries are); a different Python is noted, not a failure.
INFORMATIONAL = {"$.versions.python"}


def walk(a, b, path, rtol, out):
    """Append a message to `out` for every place where `a` and `b` differ."""
    if path in INFORMATIONAL:
        if a != b:
            print(f"note: {path} committed {a!r}, live {b!r}", file=sys.stderr)
        return
    if isinstance(a, bool) or isinstance(b, bool) or isinstance(a, str) or a is None:
        if a != b:
            out.append(f"{path}: committed {a!r}, live {b!r}")
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if isinstance(a, int) and isinstance(b, int):
            if a != b:
                out.append(f"{path}: committed {a}, live {b}")
        elif not (math.isfinite(a) and math.isfinite(b)):
            if not (a == b or (math.isnan(a) and math.isnan(b))):
                out.append(f"{path}: committed {a!r}, live {b!r}")
        elif abs(a - b) > rtol * max(abs(a), abs(b)):
            rel = abs(a - b) / max(abs(a), abs(b))
            out.append(f"{path}: committed {a!r}, live {b!r} (relative difference {rel:.2e})")
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            out.append(f"{path}: committed has {len(a)} entries, live {len(b)}")
            return
        for i, (u, v) in enumerate(zip(a, b)):
            walk(u, v, f"{path}[{i}]", rtol, out)
    elif isinstance(a, dict) and isinstance(b, dict):
        if set(a) != set(b):
            out.append(f"{path}: keys differ: committed {sorted(a)}, live {sorted(b)}")
            return
        for key in a:
            walk(a[key], b[key], f"{path}.{key}", rtol, out)
    else:
        out.append(f"{path}: committed {type(a).__name__}, live {type(b).__name__}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("committed", type=Path)
    parser.add_argument("live", type=Path)
    parser.add_argument("--rtol", type=float, default=1e-10)
    args = parser.parse_args()

    committed = sorted(p.name for p in args.committed.glob("*.json"))
    live = sorted(p.name for p in args.live.glob("*.json"))
    if not committed or committed != live:
        print(f"fixture files differ: committed {committed}, live {live}", file=sys.stderr)
        return 2
    problems = []
    for name in committed:
        with open(args.committed / name) as f:
            a = json.load(f)
        with open(args.live / name) as f:
            b = json.load(f)
        found = []
        walk(a, b, "$", args.rtol, found)
        problems += [f"{name} {msg}" for msg in found]
    for msg in problems[:50]:
        print(msg, file=sys.stderr)
    if problems:
        print(f"{len(problems)} value(s) parted beyond relative {args.rtol:g}", file=sys.stderr)
        return 1
    print(f"{len(committed)} fixture files agree to relative {args.rtol:g}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
