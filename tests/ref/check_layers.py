#!/usr/bin/env python3
"""Checks a trackswing output folder with tools outside the project: GDAL 3.6 (gdalinfo,
gdal_translate and its cloud-optimised GeoTIFF validator), PROJ through pyproj, and shapely.

    python3 tests/ref/check_layers.py OUT_DIR [--expected FILE.expected.json]

Rasters (every *.tif):
  - gdalinfo -json: CRS equal to the manifest's PROJ definition (pyproj CRS.equals) and, with
    --expected, to the grid the input came on; geotransform and size as in the manifest; nodata
    -9999 (Float32) or -32768 (Int16); band descriptions, "units" metadata and, for the stack,
    cross_km / along_km of every band as the manifest lists them; LAYOUT=COG;
  - GDAL's validate_cloud_optimized_geotiff.py --full-check=yes (Debian python3-gdal);
  - values read through GDAL: the baseline equals the stack's baseline band, min/max/range equal
    the stack's per-cell min/max/range over the bands with data where prior_coverage (the manifest's
    weights of the bands with data) reaches the manifest's min_coverage, missing elsewhere, the expected file's
    sample cells equal GDAL's values, towns.csv equals GDAL's values interpolated bilinearly at
    each town (0.05 cm: the table rounds to 0.1).
Vectors (every *.geojson): RFC 7946 — no "crs" member, lon/lat within range and rounded to 1e-5,
  every geometry valid (shapely), exterior rings counter-clockwise and holes clockwise; no polygon
  covers the centre of a missing cell; isoband and transition-zone areas match the count of cells
  in their band within a stated tolerance; the baseline rain-snow line lies where the baseline
  snow fraction, interpolated bilinearly, is 0.5.
Prints one line per check group and "N passed, N failed"; exits 1 on any failure.
"""

import argparse
import csv
import warnings
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import pyproj
import shapely
from shapely.geometry import shape

VALIDATOR = "/usr/lib/python3/dist-packages/osgeo_utils/samples/validate_cloud_optimized_geotiff.py"

passed = 0
failed = 0


def check(ok, what):
    global passed, failed
    if ok:
        passed += 1
    else:
        failed += 1
        print(f"FAIL: {what}")


def run(*args):
    out = subprocess.run(args, capture_output=True, text=True)
    if out.returncode != 0:
        raise RuntimeError(f"{args}: {out.stderr}")
    return out.stdout


def gdalinfo(path):
    return json.loads(run("gdalinfo", "-json", path))


def read_bands(path, info):
    """Every band as float64 physical values (raw * scale + offset), NaN where nodata."""
    with tempfile.TemporaryDirectory() as d:
        raw = os.path.join(d, "raw.bin")
        run("gdal_translate", "-q", "-of", "ENVI", path, raw)
        dtype = {"Float32": np.float32, "Int16": np.int16}[info["bands"][0]["type"]]
        w, h = info["size"]
        arr = np.fromfile(raw, dtype=dtype).reshape(len(info["bands"]), h, w)
    out = np.empty(arr.shape, dtype=np.float64)
    for b, band in enumerate(info["bands"]):
        v = arr[b].astype(np.float64)
        nodata = band.get("noDataValue")
        missing = np.isnan(v) | (v == nodata)
        v = v * band.get("scale", 1.0) + band.get("offset", 0.0)
        v[missing] = np.nan
        out[b] = v
    return out


class GridFrame:
    """Lon/lat <-> pixel coordinates of the grid, through PROJ (pyproj)."""

    def __init__(self, proj, gt):
        self.crs = pyproj.CRS.from_proj4(proj)
        geod = self.crs.geodetic_crs if self.crs.is_projected else self.crs
        self.to_grid = pyproj.Transformer.from_crs(geod, self.crs, always_xy=True)
        self.gt = gt

    def pixel(self, lon, lat):
        """Fractional (col, row) of the pixel-corner frame: cell (c, r) spans c..c+1."""
        x, y = self.to_grid.transform(lon, lat)
        if not self.crs.is_projected:
            x = self.gt[0] + np.mod(np.asarray(x) - self.gt[0], 360.0)
        return (np.asarray(x) - self.gt[0]) / self.gt[1], (np.asarray(y) - self.gt[3]) / self.gt[5]

    def geometry_in_pixels(self, geom):
        return shapely.transform(geom, lambda xy: np.column_stack(self.pixel(xy[:, 0], xy[:, 1])))


def bilinear(field, col, row, ignore_below=0.0):
    """Bilinear value at pixel-corner coordinates (centres at +0.5); NaN if a neighbour with a
    weight of at least `ignore_below` is NaN (smaller weights of NaN neighbours are dropped and
    the rest renormalised: coordinates rounded to 1e-5 degrees can step a hair into a square
    with a missing corner)."""
    c, r = np.asarray(col) - 0.5, np.asarray(row) - 0.5
    h, w = field.shape
    c0 = np.clip(np.floor(c).astype(int), 0, w - 2)
    r0 = np.clip(np.floor(r).astype(int), 0, h - 2)
    fc, fr = c - c0, r - r0
    total = np.zeros(c.shape)
    weight = np.zeros(c.shape)
    bad = np.zeros(c.shape, dtype=bool)
    for dr, dc, wgt in [(0, 0, (1 - fc) * (1 - fr)), (0, 1, fc * (1 - fr)), (1, 0, (1 - fc) * fr), (1, 1, fc * fr)]:
        v = field[r0 + dr, c0 + dc]
        nan = np.isnan(v)
        bad |= nan & (wgt >= ignore_below) & (wgt > 0)
        total += np.where(nan, 0.0, v * wgt)
        weight += np.where(nan, 0.0, wgt)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(bad, np.nan, total / weight)


def check_rasters(out, manifest, expected):
    files = {f["file"]: f for f in manifest["files"]}
    grid_proj = manifest["crs"]["proj"]
    grid_crs = pyproj.CRS.from_proj4(grid_proj)
    gt = manifest["grid"]["geotransform"]
    if expected:
        check(grid_crs.equals(pyproj.CRS.from_proj4(expected["proj"])) and gt == expected["geotransform"],
              f"manifest CRS {grid_proj} is the input grid's {expected['proj']}")
    size = [manifest["grid"]["columns"], manifest["grid"]["rows"]]
    stack_bands = [s for s in manifest["scenarios"]]
    data = {}
    for name in sorted(n for n in os.listdir(out) if n.endswith(".tif")):
        path = os.path.join(out, name)
        entry = files.get(name)
        check(entry is not None and entry["kind"] == "raster", f"{name} listed as raster")
        if entry is None:
            continue
        info = gdalinfo(path)
        wkt = info["coordinateSystem"]["wkt"]
        # EPSG:4326 is registered lat/lon; PROJ strings are lon/lat: compare without axis order.
        gdal_crs = pyproj.CRS.from_wkt(wkt)
        check(gdal_crs.equals(pyproj.CRS.from_proj4(entry["crs"]["proj"]), ignore_axis_order=True),
              f"{name}: GDAL's CRS equals PROJ's {entry['crs']['proj']}")
        check(gdal_crs.equals(grid_crs, ignore_axis_order=True), f"{name}: CRS is the grid's")
        if entry["crs"].get("epsg"):
            check(gdal_crs.to_epsg() == entry["crs"]["epsg"], f"{name}: EPSG:{entry['crs']['epsg']}")
        srs = run("gdalsrsinfo", "-o", "proj4", path).strip()
        check(pyproj.CRS.from_proj4(srs).equals(grid_crs), f"{name}: gdalsrsinfo {srs}")
        # gdalinfo -json prints 15 significant digits.
        check(np.allclose(info["geoTransform"], gt, rtol=1e-12, atol=0),
              f"{name}: geotransform {info['geoTransform']} vs {gt}")
        check(info["size"] == size, f"{name}: size {info['size']} vs {size}")
        check(info["metadata"]["IMAGE_STRUCTURE"].get("LAYOUT") == "COG", f"{name}: LAYOUT=COG")
        types = {b["type"] for b in info["bands"]}
        want_nodata = {"Float32": -9999.0, "Int16": -32768.0}
        for b, band in enumerate(info["bands"]):
            check(band.get("noDataValue") == want_nodata[band["type"]], f"{name} band {b + 1}: nodata")
            listed = entry["bands"][b] if b < len(entry["bands"]) else None
            check(listed is not None and band.get("description") == listed["description"],
                  f"{name} band {b + 1}: description {band.get('description')!r}")
            md = band.get("metadata", {}).get("", {})
            # Band 1 carries the file's units; later bands of a family may be codes or offsets.
            if b == 0:
                check(md.get("units") == entry["units"], f"{name} band {b + 1}: units {md.get('units')}")
            if len(info["bands"]) > 1 and name == "snowfall_by_scenario.tif":
                s = stack_bands[b]
                check(float(md["cross_km"]) == s["cross_km"] and float(md["along_km"]) == s["along_km"]
                      and listed.get("cross_km") == s["cross_km"],
                      f"{name} band {b + 1}: offsets")
        check(len(types) == 1, f"{name}: one sample type")
        if os.path.exists(VALIDATOR):
            v = subprocess.run(["/usr/bin/python3", VALIDATOR, "--full-check=yes", path],
                               capture_output=True, text=True)
            check(v.returncode == 0 and "is a valid cloud optimized GeoTIFF" in v.stdout,
                  f"{name}: COG validator: {v.stdout.strip()} {v.stderr.strip()}")
        else:
            check(os.environ.get("TRACKSWING_REQUIRE_REFERENCES") != "1",
                  f"COG validator missing ({VALIDATOR})")
        data[name] = (read_bands(path, info), info)
    print(f"rasters: {len(data)} GeoTIFFs checked")
    return data


def tolerance(info):
    band = info["bands"][0]
    return band.get("scale", 0.0) / 2 + 1e-6 if band["type"] == "Int16" else 1e-6


def check_values(out, manifest, data, expected):
    stack, sinfo = data["snowfall_by_scenario.tif"]
    base_i = next(i for i, s in enumerate(manifest["scenarios"]) if s["baseline"])
    tol = tolerance(sinfo)
    base, binfo = data["snowfall_baseline.tif"]
    same = np.allclose(base[0], stack[base_i], atol=tol + tolerance(binfo), equal_nan=True)
    check(same, "snowfall_baseline equals the stack's baseline band")
    # Prior coverage: the manifest's weights of the bands with a value, over all positive weight.
    # A several-member run summarises every member, method and offset: its stack of every
    # band, each with its blended weight in the band metadata.
    weights = np.array([s["weight"] for s in manifest["scenarios"]])
    pooled = data.get("snowfall_by_member_scenario.tif")
    if pooled is not None:
        stack = pooled[0]
        weights = np.array([float(b["metadata"][""]["weight"]) for b in pooled[1]["bands"]])
    positive = weights > 0
    coverage = np.tensordot(weights[positive], ~np.isnan(stack[positive]), 1) / weights[positive].sum()
    got_cov, _ = data["prior_coverage.tif"]
    check(np.allclose(got_cov[0], coverage, atol=1e-6), "prior_coverage equals the weight of the bands with data")
    # min/max/range over the bands with data where the coverage reaches the minimum (cells
    # within float32 rounding of it are left out of the comparison).
    min_cov = manifest["decisions"]["min_coverage"]
    near = np.abs(coverage - min_cov) < 1e-6
    covered = coverage >= min_cov
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        lo = np.where(covered, np.nanmin(stack, axis=0), np.nan)
        hi = np.where(covered, np.nanmax(stack, axis=0), np.nan)
    for a in (lo, hi):
        a[near] = np.nan
    for name, want in [("snowfall_min.tif", lo), ("snowfall_max.tif", hi), ("snowfall_range.tif", hi - lo)]:
        got, info = data[name]
        got = got[0].copy()
        got[near] = np.nan
        check(np.allclose(got, want, atol=2 * tol + tolerance(info), equal_nan=True),
              f"{name} equals the stack's per-cell {name[9:12]}")
    if expected:
        for cell in expected["cells"]:
            c, r = cell["col"], cell["row"]
            for b, want in enumerate(cell["by_scenario_cm"]):
                got = stack[b, r, c]
                ok = (want is None and math.isnan(got)) or (want is not None and abs(got - want) <= tol * 1.01 + 1e-6 * abs(want))
                check(ok, f"stack band {b + 1} cell {c},{r}: GDAL {got} vs computed {want}")
        print(f"values: {len(expected['cells'])} sample cells compared with the computed values")
    frame = GridFrame(manifest["crs"]["proj"], manifest["grid"]["geotransform"])
    unit = [f for f in manifest["files"] if f["file"] == "snowfall_baseline.tif"][0]["units"]
    with open(os.path.join(out, "towns.csv")) as f:
        rows = list(csv.DictReader(f))
    for t in rows:
        col, row = frame.pixel(float(t["lon"]), float(t["lat"]))
        v = bilinear(stack[base_i], np.array([col]), np.array([row]))[0]
        cell = t[f"baseline_{unit}"]
        if cell == "":
            check(math.isnan(v), f"town {t['name']}: missing in the table and in the raster")
        else:
            # Town coordinates are printed to 1e-5 degrees: allow for that and the 0.1 rounding.
            check(abs(v - float(cell)) <= 0.05 + 2 * tol + 0.02, f"town {t['name']}: table {cell} vs raster {v:.3f}")
    print(f"values: stack consistency and {len(rows)} towns checked")


def rings(geom):
    polys = getattr(geom, "geoms", [geom])
    for p in polys:
        yield p.exterior, True
        for h in p.interiors:
            yield h, False


def check_vectors(out, manifest, data):
    files = {f["file"]: f for f in manifest["files"]}
    frame = GridFrame(manifest["crs"]["proj"], manifest["grid"]["geotransform"])
    stack = data["snowfall_by_scenario.tif"][0]
    h, w = stack.shape[1:]
    cols, rows = np.meshgrid(np.arange(w) + 0.5, np.arange(h) + 0.5)
    for name in sorted(n for n in os.listdir(out) if n.endswith(".geojson")):
        entry = files.get(name)
        check(entry is not None and entry["kind"] == "vector" and entry["crs"]["epsg"] == 4326,
              f"{name}: listed as a vector layer in EPSG:4326")
        with open(os.path.join(out, name)) as f:
            doc = json.load(f)
        check("crs" not in doc, f"{name}: no crs member (RFC 7946 §4)")
        bad = 0
        for feat in doc["features"]:
            g = shape(feat["geometry"])
            if g.is_empty:
                continue
            coords = shapely.get_coordinates(g)
            check(bool(np.all(np.abs(coords[:, 0]) <= 180) and np.all(np.abs(coords[:, 1]) <= 90)),
                  f"{name}: coordinates in range")
            check(bool(np.all(np.abs(coords * 1e5 - np.round(coords * 1e5)) < 1e-6)),
                  f"{name}: coordinates rounded to 1e-5")
            if not g.is_valid:
                bad += 1
                print(f"  {name}: {shapely.validation.explain_validity(g)}")
            if g.geom_type in ("Polygon", "MultiPolygon"):
                for ring, exterior in rings(g):
                    if ring.is_ccw != exterior:
                        bad += 1
                        print(f"  {name}: {'exterior' if exterior else 'hole'} ring wrongly oriented")
        check(bad == 0, f"{name}: all geometries valid and oriented per RFC 7946 §3.1.6")
        print(f"vectors: {name}: {len(doc['features'])} features")

    def pixel_area(feat):
        g = frame.geometry_in_pixels(shape(feat["geometry"]))
        return g, g.area, g.length

    def covers_missing(g, missing):
        return bool(np.any(shapely.contains_xy(g, cols[missing], rows[missing])))

    # Isobands: area in cells vs the number of cells in the band. Linear interpolation moves each
    # boundary by up to half a cell from the cell-centre classification, and the data area cuts
    # corners by 1/8 cell, so allow 0.5 cell per cell of boundary length plus 2 % and 4 cells.
    for name, raster in [("snowfall_bands_baseline.geojson", "snowfall_baseline.tif"),
                         ("snowfall_bands_max.geojson", "snowfall_max.tif")]:
        field = data[raster][0][0]
        missing = np.isnan(field)
        with open(os.path.join(out, name)) as f:
            feats = json.load(f)["features"]
        geoms = []
        for feat in feats:
            p = feat["properties"]
            g, area, perim = pixel_area(feat)
            geoms.append(g)
            lo, up = p["lower"], p["upper"]
            with np.errstate(invalid="ignore"):
                n = int(np.sum((field >= lo) & ((field < up) if up is not None else True)))
            check(abs(area - n) <= 0.02 * n + 0.5 * perim + 4,
                  f"{name} {p['label']}: area {area:.1f} cells vs {n} cells in band (perimeter {perim:.0f})")
            check(not covers_missing(g, missing), f"{name} {p['label']}: covers no missing cell")
        overlap = sum(geoms[i].intersection(geoms[j]).area for i in range(len(geoms)) for j in range(i + 1, len(geoms)))
        check(overlap < 1e-3, f"{name}: bands do not overlap ({overlap:.2e} cells)")
        print(f"vectors: {name}: areas consistent with cell counts")

    fraction = data["snow_fraction_baseline.tif"][0][0]
    with open(os.path.join(out, "transition_zones.geojson")) as f:
        zones = json.load(f)["features"]
    base_zone = [z for z in zones if z["properties"]["baseline"]][0]
    g, area, perim = pixel_area(base_zone)
    with np.errstate(invalid="ignore"):
        n = int(np.sum((fraction >= 0.1) & (fraction < 0.9)))
    check(abs(area - n) <= 0.02 * n + 0.5 * perim + 4,
          f"transition zone (baseline): area {area:.1f} cells vs {n} cells with 0.1 <= f < 0.9")
    check(not covers_missing(g, np.isnan(fraction)), "transition zone covers no cell without a snow fraction")
    check(len(zones) == len(manifest["scenarios"]), "one transition zone per scenario")

    with open(os.path.join(out, "flip_zone.geojson")) as f:
        flips = json.load(f)["features"]
    any_missing = np.isnan(stack).any(axis=0)
    for feat in flips:
        p = feat["properties"]
        g, area, perim = pixel_area(feat)
        # Mask polygons follow cell edges, cutting corners by 1/8 cell.
        check(abs(area - p["cells"]) <= 0.25 * perim + 1, f"flip zone {p['baseline_type']}/{p['types']}: area {area:.1f} vs {p['cells']} cells")
        check(not covers_missing(g, any_missing), f"flip zone {p['types']}: covers no missing cell")
        present = [t for t in ("snow", "ice_pellets", "freezing_rain", "rain") if p[f"{t}_scenarios_max"] > 0]
        check(p["type_count"] == len(present) >= 2 and p["scenarios"] == stack.shape[0],
              f"flip zone {p['types']}: counts consistent")
    print(f"vectors: flip zone: {len(flips)} patterns")

    with open(os.path.join(out, "rain_snow_lines.geojson")) as f:
        lines = json.load(f)["features"]
    base_line = [l for l in lines if l["properties"]["baseline"]][0]
    coords = shapely.get_coordinates(shape(base_line["geometry"]))
    if len(coords):
        col, row = frame.pixel(coords[:, 0], coords[:, 1])
        v = bilinear(fraction, col, row, ignore_below=1e-3)
        worst = float(np.nanmax(np.abs(v - 0.5)))
        check(not np.isnan(v).any() and worst < 0.01,
              f"rain-snow line: snow fraction at its {len(coords)} vertices within 0.01 of 0.5 (worst {worst:.4f})")
    print("vectors: rain-snow line lies on the 0.5 snow fraction")


def check_manifest(out, manifest):
    listed = {f["file"] for f in manifest["files"]}
    present = set(os.listdir(out)) - {"manifest.json"}
    check(listed == present, f"manifest lists exactly the other files present: {sorted(listed ^ present)}")
    check(bool(manifest.get("trackswing_version")) and bool(manifest.get("case_file")), "manifest: version and case file")
    check(all(len(i["sha256"]) == 64 for i in manifest["inputs"]), "manifest: SHA-256 of every input")
    for f in manifest["files"]:
        check(f["kind"] in ("raster", "vector", "table", "image", "report", "style"), f"manifest: {f['file']} kind")
        check("crs" in f and "proj" in f["crs"], f"manifest: {f['file']} CRS")
    print(f"manifest: {len(listed)} files")


def check_styles(out, manifest):
    """Every raster has a QGIS style and an OGC SLD beside it: well-formed XML (Python's own
    parser), colouring band 1, one colour per class in increasing class order, the same colours
    and labels in both, and the recorded SHA-256 of each file."""
    import hashlib
    import xml.etree.ElementTree as ET
    rasters = [f["file"] for f in manifest["files"] if f["kind"] == "raster"]
    sha = {f["file"]: f.get("sha256") for f in manifest["files"] if f["kind"] == "style"}
    sld_ns = "{http://www.opengis.net/sld}"
    for r in rasters:
        stem = r[: -len(".tif")]
        q, s = f"{stem}.qml", f"{stem}.sld"
        check(q in sha and s in sha, f"styles: {r} has {q} and {s}")
        if q not in sha or s not in sha:
            continue
        for name in (q, s):
            with open(os.path.join(out, name), "rb") as fh:
                check(hashlib.sha256(fh.read()).hexdigest() == sha[name], f"styles: {name} SHA-256 as recorded")
        qroot = ET.parse(os.path.join(out, q)).getroot()
        renderer = qroot.find("./pipe/rasterrenderer")
        check(renderer is not None and renderer.get("band") == "1", f"styles: {q} colours band 1")
        items = qroot.findall(".//colorrampshader/item")
        sroot = ET.parse(os.path.join(out, s)).getroot()
        entries = sroot.findall(f".//{sld_ns}ColorMapEntry")
        band = sroot.find(f".//{sld_ns}SourceChannelName")
        check(band is not None and band.text == "1", f"styles: {s} colours band 1")
        check(len(items) == len(entries) >= 1, f"styles: {q} and {s} have the same classes")
        check([i.get("color") for i in items] == [e.get("color") for e in entries]
              and [i.get("label") for i in items] == [e.get("label") for e in entries],
              f"styles: {q} and {s} have the same colours and labels")
        bounds = [float(i.get("value")) for i in items[:-1]]
        check(all(a < b for a, b in zip(bounds, bounds[1:])), f"styles: {q} class bounds increase")
    print(f"styles: {len(rasters)} rasters, each with a QGIS and an SLD style")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("out")
    ap.add_argument("--expected")
    a = ap.parse_args()
    with open(os.path.join(a.out, "manifest.json")) as f:
        manifest = json.load(f)
    expected = None
    if a.expected:
        with open(a.expected) as f:
            expected = json.load(f)
    check_manifest(a.out, manifest)
    check_styles(a.out, manifest)
    data = check_rasters(a.out, manifest, expected)
    check_values(a.out, manifest, data, expected)
    check_vectors(a.out, manifest, data)
    print(f"check_layers {a.out}: {passed} passed, {failed} failed")
    sys.exit(1 if failed else 0)


if __name__ == "__main__":
    main()
