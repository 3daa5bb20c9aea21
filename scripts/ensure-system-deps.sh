#!/usr/bin/env bash
# Make sure the machine has what icefold's build needs: a Rust toolchain, pkg-config and the
# HDF5 C library (with its high-level library, libhdf5_hl). On Debian/Ubuntu as root this
# installs the missing packages; elsewhere it stops with the exact command to run.
set -euo pipefail

if ! command -v cargo >/dev/null 2>&1; then
  echo "icefold needs a Rust toolchain (cargo). Install it from your package manager or with rustup." >&2
  exit 1
fi

have_hdf5() {
  command -v pkg-config >/dev/null 2>&1 && pkg-config --exists hdf5 2>/dev/null && return 0
  # Debian installs hdf5.pc under the serial flavour.
  command -v pkg-config >/dev/null 2>&1 && pkg-config --exists hdf5-serial 2>/dev/null && return 0
  [ -n "${HDF5_DIR:-}" ] && return 0
  return 1
}

if have_hdf5; then
  exit 0
fi

if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
  echo "icefold: installing libhdf5-dev and pkg-config with apt-get" >&2
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq libhdf5-dev pkg-config >/dev/null
  have_hdf5 && exit 0
  echo "icefold: HDF5 still not found after installing libhdf5-dev" >&2
  exit 1
fi

cat >&2 <<'MSG'
icefold needs the HDF5 C library (1.10 or later) and pkg-config. Install them with one of:
  Debian/Ubuntu:  sudo apt-get install libhdf5-dev pkg-config
  macOS:          brew install hdf5 pkg-config
  conda:          conda install -c conda-forge hdf5 pkg-config   (then export HDF5_DIR=$CONDA_PREFIX)
and run the command again.
MSG
exit 1
