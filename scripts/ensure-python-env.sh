#!/usr/bin/env bash
# Create (once) the project's Python virtual environment in .venv with the pinned reference
# libraries of tests/python/requirements.txt (re-installed when the requirements change), then
# build the Python package `icefold` (python/, PyO3 extension built with maturin) and install it
# there (again only when src/, python/ or the Cargo files changed since the last install).
#
# `scripts/ensure-python-env.sh --cargo-env` prints the environment maturin gives cargo, as
# NAME=VALUE words: `make test` builds the command-line tool with it and the whole workspace, so
# that the tool shares every compiled crate with the package's build instead of compiling the
# library a second time (cargo rebuilds a crate when the environment its build script reads
# changes, and unifies features only across the packages of one build).
set -euo pipefail
cd "$(dirname "$0")/.."
venv=.venv
req=tests/python/requirements.txt
stamp=$venv/.requirements.sha256
pkg_stamp=$venv/.icefold-package.stamp

cargo_env() {
  local py sig
  py="$PWD/$venv/bin/python"
  sig=$("$py" -c 'import sys; print(f"{sys.implementation.name}-{sys.version_info[0]}.{sys.version_info[1]}-{64 if sys.maxsize > 2**32 else 32}bit")')
  echo "PYO3_PYTHON=$py PYTHON_SYS_EXECUTABLE=$py PYO3_BUILD_EXTENSION_MODULE=1 PYO3_ENVIRONMENT_SIGNATURE=$sig"
}

if [ "${1:-}" = "--cargo-env" ]; then
  cargo_env
  exit 0
fi

if ! python3 -c 'import venv, ensurepip' >/dev/null 2>&1; then
  if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq && apt-get install -y -qq python3-venv python3-pip >/dev/null
  else
    echo "icefold: python3 with the venv module is needed (Debian/Ubuntu: sudo apt-get install python3-venv)" >&2
    exit 1
  fi
fi

want=$(sha256sum "$req" | cut -d' ' -f1)
if ! { [ -x "$venv/bin/python" ] && [ -f "$stamp" ] && [ "$(cat "$stamp")" = "$want" ]; }; then
  python3 -m venv "$venv"
  "$venv/bin/python" -m pip install --quiet --upgrade pip
  "$venv/bin/python" -m pip install --quiet -r "$req"
  echo "$want" > "$stamp"
  rm -f "$pkg_stamp"
fi

# The package: rebuilt when any of its inputs is newer than the last install.
if [ -f "$pkg_stamp" ] && [ -z "$(find src python Cargo.toml Cargo.lock -newer "$pkg_stamp" -print -quit)" ]; then
  exit 0
fi
echo "icefold: building the Python package (python/) with maturin" >&2
wheels=target/wheels
rm -f "$wheels"/icefold-*.whl
touch "$pkg_stamp.new"  # inputs changed during the build are newer than this: built again next time
# --auditwheel skip: a wheel for this machine, linked to the HDF5 library the build found;
# stored uncompressed (it is only unpacked here, and compressing 60 MB takes longer).
"$venv/bin/maturin" build --quiet --release --auditwheel skip --compression-method stored -i "$venv/bin/python" \
  -m python/Cargo.toml -o "$wheels"
"$venv/bin/python" -m pip install --quiet --no-deps --force-reinstall "$wheels"/icefold-*.whl
mv "$pkg_stamp.new" "$pkg_stamp"
