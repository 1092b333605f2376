#!/usr/bin/env python3
"""Compares trackswing's CRPS and weighted CDF (src/verify/scores.rs) with properscoring 0.1.

Run from the repository root after `cargo build --release` (or `cargo test --release`):

    python3 tests/ref/check_scores.py [path/to/trackswing]

It draws random weighted ensembles (ties included: values rounded to 0.5), pipes them through
the hidden subcommand `trackswing score-table` (src/verify/score_table.rs, one line
`y x1 w1 x2 w2 ...` per ensemble) and compares:
- CRPS with `properscoring.crps_ensemble(y, x, weights=w)`, which integrates (F(x) - 1{x >= y})^2
  of the weighted empirical CDF exactly; tolerance 1e-9 relative plus 1e-12;
- F(y-) and F(y) (the ends of the randomised PIT's step) with numpy sums of the weights below
  and at or below y; tolerance 1e-12.
Exit status 0 when every ensemble agrees, 1 otherwise.
"""

import subprocess
import sys

import numpy as np
import properscoring

BIN = sys.argv[1] if len(sys.argv) > 1 else "target/release/trackswing"

rng = np.random.default_rng(2026)
cases = []
for k in range(400):
    n = 1 + k % 60
    x = np.round(rng.uniform(0.0, 40.0, n) * 2.0) / 2.0
    if k % 4 == 0:
        x[: n // 3] = 0.0  # many scenarios without snow, as away from the storm
    w = rng.uniform(0.01, 1.0, n)
    y = float(np.round(rng.uniform(-2.0, 45.0) * 2.0) / 2.0)
    if k % 5 == 0:
        y = float(x[rng.integers(n)])  # the observation equals a scenario
    cases.append((y, x, w))

text = "".join(
    " ".join([repr(y)] + [f"{a!r} {b!r}" for a, b in zip(x.tolist(), w.tolist())]) + "\n"
    for y, x, w in cases
)
out = subprocess.run(
    [BIN, "score-table"], input=text, capture_output=True, text=True, check=True
).stdout.split()
out = [" ".join(out[i : i + 3]) for i in range(0, len(out), 3)]
if len(out) != len(cases):
    print(f"check_scores: {len(out)} lines back for {len(cases)} ensembles")
    sys.exit(1)

bad = 0
for (y, x, w), line in zip(cases, out):
    crps, below, upto = (float(v) for v in line.split())
    want = float(properscoring.crps_ensemble(y, x, weights=w))
    total = w.sum()
    want_below = w[x < y].sum() / total
    want_upto = w[x <= y].sum() / total
    if abs(crps - want) > 1e-9 * abs(want) + 1e-12:
        bad += 1
        print(f"CRPS differs: y={y} n={len(x)}: trackswing {crps!r}, properscoring {want!r}")
    if abs(below - want_below) > 1e-12 or abs(upto - want_upto) > 1e-12:
        bad += 1
        print(f"CDF differs: y={y}: ({below}, {upto}) vs ({want_below}, {want_upto})")

print(
    f"check_scores: {len(cases)} weighted ensembles against properscoring "
    f"0.1: "
    f"{'all agree' if bad == 0 else f'{bad} differ'}"
)
sys.exit(1 if bad else 0)
