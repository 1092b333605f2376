#!/usr/bin/env python3
"""Checks the spread layers and the blended summaries of a several-member run against an
independent computation.

Reads the per-scenario stack `snowfall_by_member_scenario.tif` through GDAL (band values, and the
band metadata `member`, `precip_type`, `snow_ratio`, `weight`), computes with numpy the weighted
variance of every cell and its parts by the law of total variance (between members, between
methods within a member, within), and compares them with `snowfall_spread.tif` and
`snowfall_spread_share.tif` as GDAL reads them. Cells follow the coverage rule of the manifest
(`min_coverage`): summarised over the bands with a value, weights renormalised, where they carry
at least that share of the weight.

The blended summaries (snowfall_mean/min/max/exceedance/p10/p50/p90.tif) pool every band: the
mean and the probabilities are weighted over the bands with a value, min and max over them; a
percentile P_q of the blend must satisfy F(P_q - e) <= q <= F(P_q + e), F the mixture of the
groups' cumulative distributions (each group's mid-step positions, linear between its values,
evaluated with numpy.interp), weighted by each group's share of the weight with a value.

When the members are aligned on their mean track, it also recomputes `track_explains_members.tif`
from `snowfall_member_baseline.tif` and `snowfall_member_aligned.tif` with the manifest's member
weights: 1 − Var(aligned)/Var(as issued) between the members, clamped to 0–1, nodata where a
member is missing or the members as issued have a standard deviation under 0.05 mm.

    /usr/bin/python3 tests/ref/check_spread.py OUT_DIR
"""
import json
import os
import sys

import numpy as np
from osgeo import gdal

out = sys.argv[1]
gdal.UseExceptions()
stack = gdal.Open(os.path.join(out, "snowfall_by_member_scenario.tif"))
nodata = stack.GetRasterBand(1).GetNoDataValue()
values, weights, members, methods = [], [], [], []
for b in range(1, stack.RasterCount + 1):
    band = stack.GetRasterBand(b)
    md = band.GetMetadata()
    v = band.ReadAsArray().astype(np.float64)
    v[v == nodata] = np.nan
    values.append(v)
    weights.append(float(md["weight"]))
    members.append(md["member"])
    methods.append(md["member"] + "|" + md["precip_type"] + "/" + md["snow_ratio"])
x = np.stack(values)  # (bands, rows, cols)
w = np.array(weights)[:, None, None] * np.ones_like(x)
assert abs(sum(weights) - 1.0) < 1e-6, f"band weights add up to {sum(weights)}"
min_cov = json.load(open(os.path.join(out, "manifest.json")))["decisions"]["min_coverage"]

have = ~np.isnan(x)
w = np.where(have, w, 0.0)
xv = np.where(have, x, 0.0)
carried = w.sum(axis=0)
ok = carried >= min_cov - 1e-9
W = np.where(carried > 0, carried, 1.0)
mean = (w * xv).sum(axis=0) / W
total = (w * (xv - mean) ** 2).sum(axis=0) / W


def group_means(keys):
    out = {}
    for k in sorted(set(keys)):
        idx = [i for i, key in enumerate(keys) if key == k]
        wk = w[idx].sum(axis=0)
        mk = np.where(wk > 0, (w[idx] * xv[idx]).sum(axis=0) / np.where(wk > 0, wk, 1.0), 0.0)
        out[k] = (idx, wk, mk)
    return out


by_member = group_means(members)
by_method = group_means(methods)
between_members = sum(wk * (mk - mean) ** 2 for _, wk, mk in by_member.values()) / W
between_methods = np.zeros_like(mean)
within = np.zeros_like(mean)
for key, (idx, wk, mk) in by_method.items():
    member_mean = by_member[key.split("|")[0]][2]
    between_methods += wk * (mk - member_mean) ** 2
    within += (w[idx] * (xv[idx] - mk) ** 2).sum(axis=0)
between_methods /= W
within /= W

spread = gdal.Open(os.path.join(out, "snowfall_spread.tif"))
share = gdal.Open(os.path.join(out, "snowfall_spread_share.tif"))
got = [spread.GetRasterBand(i).ReadAsArray().astype(np.float64) for i in range(1, 5)]
got_share = [share.GetRasterBand(i).ReadAsArray().astype(np.float64) for i in range(1, 4)]
failures = 0


def check(name, want, have_, tol):
    global failures
    missing = have_ == nodata
    if (missing != ~ok).any():
        print(f"FAIL {name}: nodata at {int((missing != ~ok).sum())} cells where the coverage rule says otherwise")
        failures += 1
        return
    err = np.abs(have_[ok] - want[ok])
    worst = err.max() if err.size else 0.0
    status = "ok" if worst <= tol else "FAIL"
    failures += status == "FAIL"
    print(f"{status} {name}: {int(ok.sum())} cells, largest difference {worst:.2e} (tolerance {tol:g})")


# Float32 output of values up to ~50 cm: a few 1e-5 relative.
scale = max(1.0, float(np.nanmax(np.sqrt(total[ok]))))
tol = 2e-5 * scale
check("total σ", np.sqrt(total), got[0], tol)
check("σ between members", np.sqrt(between_members), got[1], tol)
check("σ between methods", np.sqrt(between_methods), got[2], tol)
check("σ within", np.sqrt(within), got[3], tol)
identity = np.abs(got[0][ok] ** 2 - (got[1][ok] ** 2 + got[2][ok] ** 2 + got[3][ok] ** 2))
print(f"{'ok' if identity.max() <= 1e-3 * scale**2 else 'FAIL'} parts add up: largest |σ² − Σ parts²| {identity.max():.2e}")
failures += identity.max() > 1e-3 * scale**2
spread_cells = ok & (total > 1e-6 * scale**2)
for k, (name, part) in enumerate([("members", between_members), ("methods", between_methods), ("track", within)]):
    want = part[spread_cells] / total[spread_cells]
    err = np.abs(got_share[k][spread_cells] - want).max()
    print(f"{'ok' if err <= 1e-3 else 'FAIL'} share {name}: largest difference {err:.2e}")
    failures += err > 1e-3


def layer(name, band=1):
    ds = gdal.Open(os.path.join(out, name))  # kept open while its band is read
    v = ds.GetRasterBand(band)
    a = v.ReadAsArray().astype(np.float64)
    return np.where(a == v.GetNoDataValue(), np.nan, a)


def close(name, want, got_, tol):
    global failures
    miss = np.isnan(got_)
    if (miss != ~ok).any():
        print(f"FAIL {name}: nodata at {int((miss != ~ok).sum())} cells where the coverage rule says otherwise")
        failures += 1
        return
    err = np.abs(got_[ok] - want[ok]).max()
    status = "ok" if err <= tol else "FAIL"
    failures += status == "FAIL"
    print(f"{status} blended {name}: largest difference {err:.2e} (tolerance {tol:g})")


close("mean", mean, layer("snowfall_mean.tif"), tol)
close("min", np.where(ok, np.nanmin(np.where(have, x, np.inf), axis=0), np.nan), layer("snowfall_min.tif"), tol)
close("max", np.where(ok, np.nanmax(np.where(have, x, -np.inf), axis=0), np.nan), layer("snowfall_max.tif"), tol)
ex = gdal.Open(os.path.join(out, "snowfall_exceedance.tif"))
for b in range(1, ex.RasterCount + 1):
    t = float(ex.GetRasterBand(b).GetMetadata()["threshold"])
    # The layer compares mm with the threshold in mm; the stack holds cm rounded to float32,
    # so a band within 1e-4 cm of the threshold may count either way.
    xs = np.where(have, x, -np.inf)
    lo = (w * (xs >= t + 1e-4)).sum(axis=0) / W
    hi = (w * (xs >= t - 1e-4)).sum(axis=0) / W
    g = layer("snowfall_exceedance.tif", b)
    close(f"P(snowfall >= {t:g}) above its lower bound", np.minimum(g, lo), np.where(ok, lo, np.nan), 1e-5)
    close(f"P(snowfall >= {t:g}) below its upper bound", np.maximum(g, hi), np.where(ok, hi, np.nan), 1e-5)

groups = {}
for i, key in enumerate(methods):
    groups.setdefault(key, []).append(i)
quantile_layers = {q: layer(f"snowfall_p{int(q * 100)}.tif") for q in (0.1, 0.5, 0.9)}
rows, cols = np.nonzero(ok)
bad = 0
eps = 1e-3
for r, c in zip(rows, cols):
    parts = []
    for idx in groups.values():
        v = x[idx, r, c]
        wt = w[idx, r, c]
        keep = ~np.isnan(v) & (wt > 0)
        if not keep.any():
            continue
        order = np.argsort(v[keep], kind="stable")
        vs, ws = v[keep][order], wt[keep][order]
        pos = (np.cumsum(ws) - ws / 2) / ws.sum()
        parts.append((ws.sum(), vs, pos))
    total_w = sum(p[0] for p in parts)

    def cdf(z):
        return sum(wg / total_w * np.interp(z, vs, pos, left=0.0, right=1.0) for wg, vs, pos in parts)

    for q, lay in quantile_layers.items():
        p = lay[r, c]
        if not (cdf(p - eps) <= q + 1e-9 and cdf(p + eps) >= q - 1e-9):
            bad += 1
            if bad <= 5:
                print(f"  cell ({r}, {c}): P{int(q * 100)} = {p}, F(P - e) = {cdf(p - eps)}, F(P + e) = {cdf(p + eps)}")
print(f"{'ok' if bad == 0 else 'FAIL'} blended P10/P50/P90: {len(rows)} cells, {bad} outside the mixture's quantile")
failures += bad > 0

aligned_path = os.path.join(out, "snowfall_member_aligned.tif")
if os.path.exists(aligned_path):
    manifest = json.load(open(os.path.join(out, "manifest.json")))
    mw = np.array([m["weight"] for m in manifest["ensemble"]["members"]])[:, None, None]

    def bands(name):
        ds = gdal.Open(os.path.join(out, name))
        arr = []
        for i in range(1, ds.RasterCount + 1):
            b = ds.GetRasterBand(i)
            v = b.ReadAsArray().astype(np.float64)
            v[v == b.GetNoDataValue()] = np.nan
            arr.append(v)
        return np.stack(arr)

    def var(v):
        m = (mw * v).sum(axis=0) / mw.sum()
        return (mw * (v - m) ** 2).sum(axis=0) / mw.sum()

    b, a = bands("snowfall_member_baseline.tif"), bands("snowfall_member_aligned.tif")
    got = bands("track_explains_members.tif")[0]
    # The threshold, 0.05 mm of snow, in the layers' unit (cm or in).
    no_spread = 0.005 if manifest["units"] == "metric" else 0.05 / 25.4
    sd = np.sqrt(var(b))
    have_all = ~np.isnan(b).any(axis=0) & ~np.isnan(a).any(axis=0)
    want = np.clip(1.0 - var(a) / np.where(sd > 0, sd**2, 1.0), 0.0, 1.0)
    want[~have_all | (sd < no_spread)] = np.nan
    # Away from the threshold, where Float32 rounding cannot move a cell across it.
    clear = ~have_all | (sd < 0.5 * no_spread) | (sd > 2.0 * no_spread)
    wrong_nodata = int((np.isnan(got) != np.isnan(want))[clear].sum())
    # Float32 totals: the share is good to about 1e-3 where σ is ten times the threshold.
    firm = have_all & (sd >= 10.0 * no_spread)
    err = np.abs(got[firm] - want[firm]).max() if firm.any() else 0.0
    bad = wrong_nodata > 0 or err > 1e-3
    print(f"{'FAIL' if bad else 'ok'} track_explains_members: {int(firm.sum())} cells, largest difference {err:.2e}, nodata differs at {wrong_nodata} cells")
    failures += bad
sys.exit(1 if failures else 0)
