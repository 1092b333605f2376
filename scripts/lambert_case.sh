#!/usr/bin/env bash
# Builds a GRIB2 case on a Lambert conformal grid the way an analyst would: the invented demo
# storm as lat/lon GRIB2 (`trackswing make-demo --grib2`), each file reprojected by GDAL
# (gdalwarp, bilinear, 40 km cells, complex packing so the cells outside the source stay
# missing), with the demo's track and towns. Used by .ci/run to run the binary end to end on a
# projected model grid and check the layers with tests/ref/check_layers.py.
#
#   scripts/lambert_case.sh BIN DIR
set -euo pipefail
bin=$1
dir=$2
src=$(mktemp -d)
trap 'rm -rf "$src"' EXIT
"$bin" make-demo --grib2 --out "$src" --nx 48 --ny 39 --steps 7 --step-hours 3 --levels 5 > /dev/null
mkdir -p "$dir/fields"
cp "$src/towns.csv" "$src/track.csv" "$src/case.toml" "$dir/"
lcc="+proj=lcc +lat_1=44 +lat_2=50 +lat_0=47 +lon_0=-25 +R=6371229 +units=m +no_defs"
for f in "$src"/fields/*.grib2; do
  GRIB_NORMALIZE_UNITS=NO gdalwarp -q -t_srs "$lcc" -tr 40000 40000 -r bilinear \
    -dstnodata 9999 -of GRIB -co DATA_ENCODING=COMPLEX_PACKING "$f" "$dir/fields/$(basename "$f")"
done
