#!/usr/bin/env python3
"""Checks `trackswing track-error`'s geodesic decomposition against geographiclib
(Karney 2013, "Algorithms for geodesics", J. Geodesy 87, 43–55; the PyPI package
`geographiclib`, pinned in .ci/run), a general-purpose geodesic library independent of the
Rust code.

Builds hourly forecast tracks on several headings and latitudes, and for each an analysed track
at known cross-track (positive left of the motion) and along-track (positive ahead) offsets:
the forecast's direction of motion at a point is the azimuth of geographiclib's Inverse between
the track's positions one hour either side (the point itself at the two ends, as trackswing
takes it), and the analysed centre is geographiclib's Direct from the forecast centre along
azimuth heading + atan2(-cross, along) for sqrt(cross² + along²) km. Runs the binary on the
files and compares every row of track_error.csv with the known offsets, and total_km with
geographiclib's Inverse distance, to 2 m (the CSV keeps 1 m).

    python3 tests/ref/check_track_error.py target/release/trackswing
"""
import csv
import math
import os
import subprocess
import sys
import tempfile
from datetime import datetime, timedelta, timezone

from geographiclib.geodesic import Geodesic

WGS84 = Geodesic.WGS84
TOL_KM = 0.002

# (start lat, start lon, azimuth of motion, km per hour): north-east at mid-latitudes, a track
# curving over high latitudes, one crossing the antimeridian, one in the southern hemisphere.
TRACKS = [(38.0, -95.0, 50.0, 45.0), (62.0, 10.0, 100.0, 60.0), (45.0, 178.5, 80.0, 50.0),
          (-40.0, 140.0, 120.0, 55.0)]
OFFSETS = [(120.0, -40.0), (-75.0, 210.0), (0.0, -300.0), (250.0, 0.0), (-30.0, -60.0),
           (10.0, 10.0), (-180.0, -180.0)]
T0 = datetime(2026, 1, 14, tzinfo=timezone.utc)


def forecast_points(lat, lon, azi, speed):
    pts = [(lat, lon)]
    for k in range(len(OFFSETS) - 1):
        # A gently turning track: the azimuth changes 4° an hour.
        g = WGS84.Direct(pts[-1][0], pts[-1][1], azi + 4.0 * k, speed * 1000.0)
        pts.append((g["lat2"], (g["lon2"] + 180.0) % 360.0 - 180.0))
    return pts


def heading(pts, i):
    a = pts[max(i - 1, 0)]
    b = pts[min(i + 1, len(pts) - 1)]
    return WGS84.Inverse(a[0], a[1], b[0], b[1])["azi1"]


def write_track(path, pts):
    with open(path, "w") as f:
        f.write("time,lat,lon\n")
        for k, (lat, lon) in enumerate(pts):
            t = (T0 + timedelta(hours=k)).strftime("%Y-%m-%dT%H:%M:%SZ")
            f.write(f"{t},{lat:.12f},{lon:.12f}\n")


def main():
    exe = sys.argv[1]
    worst = 0.0
    with tempfile.TemporaryDirectory() as d:
        forecasts, analyses, expected = [], [], {}
        for n, (lat, lon, azi, speed) in enumerate(TRACKS):
            pts = forecast_points(lat, lon, azi, speed)
            obs = []
            for i, (c, a) in enumerate(OFFSETS):
                h = heading(pts, i)
                g = WGS84.Direct(pts[i][0], pts[i][1], h + math.degrees(math.atan2(-c, a)),
                                 math.hypot(c, a) * 1000.0)
                obs.append((g["lat2"], (g["lon2"] + 180.0) % 360.0 - 180.0))
                inv = WGS84.Inverse(pts[i][0], pts[i][1], obs[-1][0], obs[-1][1])
                expected[(f"case{n}", float(i))] = (c, a, inv["s12"] / 1000.0)
            f, o = os.path.join(d, f"case{n}.csv"), os.path.join(d, f"case{n}_obs.csv")
            write_track(f, pts)
            write_track(o, obs)
            forecasts.append(f)
            analyses.append(o)
        out = os.path.join(d, "out")
        subprocess.run([exe, "track-error", "--forecast", *forecasts, "--analysis", *analyses,
                        "--out", out], check=True, stdout=subprocess.DEVNULL)
        rows = list(csv.DictReader(open(os.path.join(out, "track_error.csv"))))
        if len(rows) != len(expected):
            sys.exit(f"track_error.csv has {len(rows)} rows, expected {len(expected)}")
        for r in rows:
            c, a, s = expected[(r["case"], float(r["lead_h"]))]
            for name, got, want in (("cross_km", r["cross_km"], c), ("along_km", r["along_km"], a),
                                    ("total_km", r["total_km"], s)):
                err = abs(float(got) - want)
                worst = max(worst, err)
                if err > TOL_KM:
                    sys.exit(f"{r['case']} lead {r['lead_h']} h: {name} {got}, geographiclib {want:.4f}")
    print(f"track-error vs geographiclib: {len(rows)} positions, worst difference {worst * 1000:.2f} m")


if __name__ == "__main__":
    main()
