#!/usr/bin/env bash
# trackswing on real model output: one forecast file of a global model on a 2.5° lat/lon grid
# (GRIB2, 343 fields, one valid time), as shipped in the sample data of the `pygrib` source
# package on PyPI (version 2.1.8, fetched by its fixed address and checked by SHA-256).
#
# Usage: scripts/real_global.sh TRACKSWING_BINARY WORK_DIR
# Runs inspect and run on the file (whole, and two --region windows), then
# tests/ref/check_real_global.py compares the layers with
# GDAL's own decoding of the same file (needs Debian's python3-gdal at /usr/bin/python3).
set -euo pipefail
bin=$(realpath "$1")
work=$2
here=$(cd "$(dirname "$0")/.." && pwd)
url=https://files.pythonhosted.org/packages/dc/e9/29ebe5a47274afcfb37b17be9097b24cf2ff5640672cb06db12ff9a46346/pygrib-2.1.8.tar.gz
sha=7ad941571c02b9afa685cb92fb85fb5ed2cd0e36c4ec40cb74d7782dc7975400
mkdir -p "$work/model"
archive="$work/source.tar.gz"
if ! echo "$sha  $archive" | sha256sum -c --status 2>/dev/null; then
  curl -sSfL -o "$archive" "$url"
  echo "$sha  $archive" | sha256sum -c --status || { echo "real_global: $archive: SHA-256 differs"; exit 1; }
fi
# The one 2.5° global file of the sample data, by its grid in the name.
member=$(tar tzf "$archive" | grep -E 'sampledata/.*2p5deg\.grib2$')
tar xzf "$archive" -O "$member" > "$work/model/global-2p5.grib2"
model="$work/model/global-2p5.grib2"

"$bin" inspect "$model" > "$work/inspect.txt"
grep -q "144×73 cells on lat/lon, 2.5° × 2.5°" "$work/inspect.txt" || { cat "$work/inspect.txt"; exit 1; }
"$bin" run "$model" --cross 0 --along 0 --no-dry-air --out "$work/run" --quiet
/usr/bin/python3 "$here/tests/ref/check_real_global.py" "$model" "$work/run"
# Windows of the same file (`--region`): across the antimeridian (120°E…90°W, one raster with
# longitudes 118.75…271.25) and over a continent; each checked against GDAL the same way, cell
# by cell through the model cell under each output cell.
"$bin" run "$model" --cross 0 --along 0 --no-dry-air --region=120,-75,-90,75 --out "$work/run-across" --quiet
/usr/bin/python3 "$here/tests/ref/check_real_global.py" "$model" "$work/run-across"
"$bin" run "$model" --cross 0 --along 0 --no-dry-air --region=-140,20,-50,75 --out "$work/run-continent" --quiet
/usr/bin/python3 "$here/tests/ref/check_real_global.py" "$model" "$work/run-continent"
