#!/usr/bin/env bash
# The main demo: installs what is missing, builds deepdry, runs the glacial-to-arid shift
# scenario and draws its figures into cases/out/glacial-to-arid/.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
cargo build --release --quiet
./target/release/deepdry check cases/glacial-to-arid.toml
./target/release/deepdry run cases/glacial-to-arid.toml --overwrite
./target/release/deepdry plot cases/out/glacial-to-arid/results.h5
