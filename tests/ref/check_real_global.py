#!/usr/bin/env python3
"""trackswing on real output of a global model on a 2.5° lat/lon grid, checked against GDAL.

Usage: check_real_global.py MODEL.grib2 OUT_DIR

OUT_DIR is a run of `trackswing run MODEL.grib2 --cross 0 --along 0 --no-dry-air` (fixed snow
ratio 10, energy-area type). GDAL's GRIB driver decodes the same file independently; the checks:

1. Precipitation: every cell of liquid_baseline.tif (mm) equals the model's 6-hour total
   precipitation (kg m⁻², GRIB2 parameter 0/1/8) at the same longitude and latitude, as GDAL
   decodes it (tolerance 1e-3 mm + 1e-5 relative: both decode the same packed integers).
2. Snow-to-liquid ratio 10 (the fixed method): snowfall (cm) never exceeds the liquid (mm),
   since 1 mm of liquid at ratio 10 is 1 cm of snow.
3. Rules of thumb (common practice): where the 2 m and 850 hPa temperatures are both −10 °C or
   colder, precipitation falls as snow (snowfall cm = liquid mm within 2 %); where the 2 m
   temperature is +5 °C or warmer and 850 hPa +3 °C or warmer, it is rain (no snowfall).
4. The GeoTIFF's extent stays within ±90° latitude and its cells line up with the model's.

Run with the interpreter that has GDAL's Python bindings (Debian's python3-gdal).
"""
import sys

import numpy as np
from osgeo import gdal

gdal.UseExceptions()


def band(ds, element, level):
    for i in range(1, ds.RasterCount + 1):
        b = ds.GetRasterBand(i)
        m = b.GetMetadata()
        if m.get("GRIB_ELEMENT", "").startswith(element) and m.get("GRIB_SHORT_NAME") == level:
            return b.ReadAsArray().astype(np.float64), m
    sys.exit(f"{element} at {level} not found in the model file")


def main():
    model, out = sys.argv[1], sys.argv[2]
    # GDAL converts GRIB temperatures to °C unless told otherwise.
    gdal.SetConfigOption("GRIB_NORMALIZE_UNITS", "YES")
    g = gdal.Open(model)
    ggt = g.GetGeoTransform()
    precip, meta = band(g, "APCP", "0-SFC")
    t2, _ = band(g, "TMP", "2-HTGL")
    t850, _ = band(g, "TMP", "85000-ISBL")

    def read(name):
        ds = gdal.Open(f"{out}/{name}")
        b = ds.GetRasterBand(1)
        a = b.ReadAsArray().astype(np.float64)
        nd = b.GetNoDataValue()
        if nd is not None:
            a[a == nd] = np.nan
        return a, ds.GetGeoTransform(), ds

    liquid, gt, ds = read("liquid_baseline.tif")
    snow, _, _ = read("snowfall_baseline.tif")
    ny, nx = liquid.shape
    top, bottom = gt[3], gt[3] + ny * gt[5]
    assert -90.0 <= bottom < top <= 90.0, f"extent {bottom}…{top} passes a pole"

    # Model cell under each output cell centre (longitudes modulo 360).
    lat = gt[3] + (np.arange(ny) + 0.5) * gt[5]
    lon = gt[0] + (np.arange(nx) + 0.5) * gt[1]
    rows = np.rint((lat - ggt[3]) / ggt[5] - 0.5).astype(int)
    cols = np.rint(((lon - ggt[0] - 0.5 * ggt[1]) % 360.0) / ggt[1]).astype(int) % g.RasterXSize
    assert np.allclose(ggt[3] + (rows + 0.5) * ggt[5], lat), "rows do not line up"
    m_precip = precip[np.ix_(rows, cols)]
    m_t2 = t2[np.ix_(rows, cols)]
    m_t850 = t850[np.ix_(rows, cols)]

    ok = np.isfinite(liquid)
    assert ok.mean() > 0.99, f"only {ok.mean():.1%} of the cells have data"
    diff = np.abs(liquid - m_precip)
    tol = 1e-3 + 1e-5 * np.abs(m_precip)
    bad = ok & (diff > tol)
    assert not bad.any(), f"{bad.sum()} cells differ from GDAL's decode, largest {diff[ok].max()}"

    assert (snow[ok] <= liquid[ok] + 1e-3).all(), "snowfall above the liquid at ratio 10"
    cold = ok & (m_t2 <= -10.0) & (m_t850 <= -10.0) & (m_precip >= 0.5)
    warm = ok & (m_t2 >= 5.0) & (m_t850 >= 3.0) & (m_precip >= 0.5)
    assert cold.sum() >= 20 and warm.sum() >= 20, (cold.sum(), warm.sum())
    ratio = snow[cold] / liquid[cold]
    assert (np.abs(ratio - 1.0) <= 0.02).all(), f"cold cells not all snow: {ratio.min()}"
    assert (snow[warm] == 0.0).all(), f"warm cells with snow: {snow[warm].max()}"
    print(
        f"real global file: {ok.sum()} cells match GDAL's precipitation; "
        f"{cold.sum()} cold cells all snow, {warm.sum()} warm cells all rain "
        f"({meta.get('GRIB_COMMENT', '')})"
    )


if __name__ == "__main__":
    main()
