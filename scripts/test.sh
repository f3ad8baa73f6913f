#!/usr/bin/env bash
# The test command: installs what is missing, then runs the whole test suite in release
# mode (faer is ~25x slower in debug builds).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
cargo test --release
# An ensemble as a Slurm job array on a one-node cluster started (and stopped) here,
# checked against a local run of the same plan (needs root; skipped otherwise).
bash scripts/slurm-check.sh
# Real readers (xarray with h5netcdf and netCDF4, pandas from PyPI, in a virtual environment
# made once) open a results file and its CSV export: scripts/readers.sh.
bash scripts/readers.sh
