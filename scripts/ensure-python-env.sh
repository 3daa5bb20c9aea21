#!/usr/bin/env bash
# Create (once) the project's Python virtual environment in .venv with the pinned reference
# libraries of tests/python/requirements.txt. Re-installs when the requirements change.
set -euo pipefail
cd "$(dirname "$0")/.."
venv=.venv
req=tests/python/requirements.txt
stamp=$venv/.requirements.sha256

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
if [ -x "$venv/bin/python" ] && [ -f "$stamp" ] && [ "$(cat "$stamp")" = "$want" ]; then
  exit 0
fi
python3 -m venv "$venv"
"$venv/bin/python" -m pip install --quiet --upgrade pip
"$venv/bin/python" -m pip install --quiet -r "$req"
echo "$want" > "$stamp"
