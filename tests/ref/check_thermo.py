#!/usr/bin/env python3
"""Compares trackswing's thermodynamic kernels with MetPy (pinned in requirements.txt).

Run from the repository root after `cargo build --release` (or `cargo test --release`):

    python3 tests/ref/check_thermo.py [path/to/trackswing]

It writes a grid of (p, T, RH) points, pipes them through the hidden subcommand
`trackswing thermo-table` (src/diagnose/thermo_table.rs) and compares every column with the
MetPy function named beside it, within the stated tolerance. Exit status 0 when every point
agrees, 1 otherwise. MetPy changed its saturation vapour pressure formula after the 1.6 series,
so the version is pinned.
"""

import csv
import io
import subprocess
import sys

import numpy as np
import metpy
import metpy.calc as mpcalc
from metpy.units import units

BIN = sys.argv[1] if len(sys.argv) > 1 else "target/release/trackswing"

# 6 pressures × 13 temperatures × 6 humidities = 468 points, the range of winter soundings
# and beyond (−30…+30 °C, 500–1000 hPa, RH 5–100 %).
PRESSURES_HPA = [1000.0, 925.0, 850.0, 700.0, 600.0, 500.0]
TEMPS_C = [-30.0 + 5.0 * i for i in range(13)]
RH_PCT = [5.0, 20.0, 50.0, 80.0, 95.0, 100.0]


def points():
    for p in PRESSURES_HPA:
        for t in TEMPS_C:
            for rh in RH_PCT:
                yield p * 100.0, t + 273.15, rh


def run_trackswing(pts):
    text = "p_pa,t_k,rh_pct\n" + "".join(f"{p},{t},{rh}\n" for p, t, rh in pts)
    out = subprocess.run(
        [BIN, "thermo-table"], input=text, capture_output=True, text=True, check=True
    ).stdout
    rows = list(csv.DictReader(io.StringIO(out)))
    if len(rows) != len(pts):
        sys.exit(f"thermo-table returned {len(rows)} rows for {len(pts)} points")
    return {k: np.array([float(r[k]) if r[k] else np.nan for r in rows]) for k in rows[0]}


def main():
    pts = list(points())
    ours = run_trackswing(pts)
    p = np.array([x[0] for x in pts]) * units.Pa
    t = np.array([x[1] for x in pts]) * units.K
    rh = np.array([x[2] for x in pts]) * units.percent

    ref = {}
    ref["es_pa"] = mpcalc.saturation_vapor_pressure(t).to("Pa").m
    td = mpcalc.dewpoint_from_relative_humidity(t, rh)
    ref["td_k"] = td.to("K").m
    ref["tw_k"] = mpcalc.wet_bulb_temperature(p, t, td).to("K").m
    ref["theta_k"] = mpcalc.potential_temperature(p, t).to("K").m
    ref["thickness_m"] = np.array(
        [
            mpcalc.thickness_hydrostatic(
                np.array([pp, 0.8 * pp]) * units.Pa, np.array([tt, tt]) * units.K
            ).to("m").m
            for pp, tt, _ in pts
        ]
    )
    winter = np.array([x[1] <= 283.15 for x in pts])
    cold_moist = np.array([x[1] <= 273.15 and x[2] >= 20.0 for x in pts])

    # (column, MetPy reference, tolerance, relative?, which points, why that tolerance)
    checks = [
        ("es_pa", "es_pa", 1e-4, True, None,
         "same Bolton (1980) eq. 10 in MetPy 1.6.3; rounding only"),
        ("td_k", "td_k", 0.01, False, None,
         "Bolton eq. 10 inverted by both"),
        ("tw_k", "tw_k", 0.05, False, None,
         "Normand's rule; Bolton LCL and constants differ by < 0.1 % (SCIENCE.md: ±0.05 K)"),
        ("tw_isobaric_k", "tw_k", 0.1, False, cold_moist,
         "isobaric against adiabatic wet-bulb, T ≤ 0 °C and RH ≥ 20 % (measured 0.074 K)"),
        ("tw_isobaric_k", "tw_k", 0.3, False, winter,
         "isobaric against adiabatic wet-bulb, T ≤ 10 °C, any RH (measured 0.281 K at 5 %)"),
        ("theta_k", "theta_k", 2.5e-4, True, None,
         "κ = 287.04/1004 against MetPy's 2/7: 0.06 % in the exponent"),
        ("thickness_m", "thickness_m", 1e-4, True, None,
         "Rd 287.04 against MetPy's 287.0475: 3e-5 relative"),
    ]
    failed = 0
    print(f"MetPy {metpy.__version__}, numpy {np.__version__}; {len(pts)} points")
    for col, refcol, tol, relative, mask, why in checks:
        a, b = ours[col], ref[refcol]
        sel = np.ones(len(pts), bool) if mask is None else mask
        both = sel & np.isfinite(a) & np.isfinite(b)
        missing = sel & (np.isfinite(a) != np.isfinite(b))
        err = np.abs(a - b)
        if relative:
            err = err / np.abs(b)
        worst = np.nanmax(np.where(both, err, np.nan))
        bad = both & (err > tol)
        status = "ok" if not bad.any() and not missing.any() else "FAILED"
        unit = "relative" if relative else "K or m"
        print(
            f"{col:>14} vs MetPy: {both.sum():3d} points, largest difference {worst:.3g} "
            f"({unit}), tolerance {tol:g} — {status} ({why})"
        )
        for i in np.flatnonzero(bad | missing)[:5]:
            pp, tt, rr = pts[i]
            print(f"    {pp / 100:.0f} hPa {tt - 273.15:.1f} °C {rr:.0f} %: ours {a[i]} MetPy {b[i]}")
        failed += int(status != "ok")
    print(f"{len(checks) - failed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
