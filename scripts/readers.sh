#!/usr/bin/env bash
# Real readers open deepdry's files: a Python virtual environment with xarray, h5netcdf,
# netCDF4 and pandas from PyPI (made once, kept in the cargo target folder) opens a results
# file of cases/quickstart.toml (named dimensions, coordinates, units, cumulative closure)
# and reads its CSV export with plain pandas.read_csv. A step of scripts/test.sh; fails
# loudly (non-zero exit, the failing check named) when anything is missing or wrong.
set -euo pipefail
cd "$(dirname "$0")/.."
TARGET="${CARGO_TARGET_DIR:-target}"
VENV="$TARGET/readers-venv"
PY="${PYTHON:-python3}"
if ! command -v "$PY" >/dev/null 2>&1; then
    echo "readers: FAILED: no $PY to make the virtual environment (install python3 and python3-venv)" >&2
    exit 1
fi
if ! "$VENV/bin/python" -c "import xarray, h5netcdf, h5py, netCDF4, pandas" 2>/dev/null; then
    rm -rf "$VENV"
    "$PY" -m venv "$VENV" || {
        echo "readers: FAILED: python3 -m venv did not work (Debian: apt-get install python3-venv)" >&2
        exit 1
    }
    echo "readers: installing xarray, h5netcdf, h5py, netCDF4, pandas from PyPI into $VENV ..."
    "$VENV/bin/pip" install -q --disable-pip-version-check \
        "xarray>=2024.1" "h5netcdf>=1.3" "h5py>=3.10" "netCDF4>=1.6" "pandas>=2.1"
fi
cargo build --release --quiet
BIN="$TARGET/release/deepdry"
WORK="$(mktemp -d)"
trap 'rm -rf "$WORK"' EXIT
"$BIN" run cases/quickstart.toml --out "$WORK/run" --quiet >/dev/null
"$BIN" export "$WORK/run/results.h5" --out "$WORK/csv" >/dev/null
"$VENV/bin/python" scripts/readers_check.py "$WORK/run/results.h5" "$WORK/csv"
