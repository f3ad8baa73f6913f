#!/usr/bin/env bash
# Installs what the build needs and is not yet on the machine: the HDF5 C library
# (Debian/Ubuntu package libhdf5-dev) and pkg-config. Rust (cargo) must be installed.
set -euo pipefail
if ! command -v cargo >/dev/null 2>&1; then
    echo "deepdry needs Rust: install it from https://rustup.rs, then run this again" >&2
    exit 1
fi
if ! pkg-config --exists hdf5 2>/dev/null; then
    echo "installing the HDF5 library (libhdf5-dev) and pkg-config ..."
    SUDO=""
    if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
    export DEBIAN_FRONTEND=noninteractive
    $SUDO apt-get update -qq
    $SUDO apt-get install -y -qq --no-install-recommends libhdf5-dev pkg-config >/dev/null
fi
# The readers' check of scripts/test.sh (scripts/readers.sh) makes a Python virtual
# environment: python3 with its venv module (Debian: python3-venv).
if ! python3 -c "import venv, ensurepip" >/dev/null 2>&1; then
    echo "installing python3 and python3-venv ..."
    SUDO=""
    if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
    export DEBIAN_FRONTEND=noninteractive
    $SUDO apt-get update -qq
    $SUDO apt-get install -y -qq --no-install-recommends python3 python3-venv >/dev/null
fi
