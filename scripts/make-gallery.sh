#!/usr/bin/env bash
# Regenerate outputs-demo/ (or the directory given as $1): the built-in demo, then a file and
# its pictures from every example config in configs/, with the release binary.
# Usage: scripts/make-gallery.sh [OUT_DIR]   (make gallery)
# Every run is deterministic: the numbers in the .nc files come out identical each time;
# only provenance attributes (creation time, command line) differ.
set -euo pipefail
cd "$(dirname "$0")/.."
OUT="${1:-outputs-demo}"
BIN="${ICEFOLD_BIN:-target/release/icefold}"
if [ -z "${ICEFOLD_BIN:-}" ]; then cargo build --release --quiet; fi
mkdir -p "$OUT"
# Files larger than this are drawn and then removed (the pictures stay), bytes.
KEEP_MAX=400000

step() { # command config name
  local cmd="$1" cfg="configs/$2.toml" name="$3"
  shift 3
  local nc="$OUT/$name.nc"
  echo "gallery: icefold $cmd $cfg -> $nc" >&2
  "$BIN" "$cmd" "$cfg" -o "$nc" --overwrite "$@"
  "$BIN" plot "$nc" --out-dir "$OUT" 2>/dev/null
  if [ "$(stat -c %s "$nc")" -gt "$KEEP_MAX" ]; then rm -f "$nc"; fi
}

if [ "${GALLERY_ONLY:-}" = "" ]; then
  "$BIN" demo --out-dir "$OUT" 2>/dev/null
fi
step run classic-step-albedo classic-run
step equilibrium classic-step-albedo classic-equilibrium
step run smooth-albedo smooth-run
step run gray-body gray-body-run
step run global-mean global-mean-run
step run emission-level-co2 emission-level-run
step run globe-with-land globe-land-run
step run seasonal-globe seasonal-run
step run forcing-orvane orvane-run
step sweep sweep-solar solar-sweep
step branches branches-solar solar-branches
step branches branches-co2 co2-branches
step branches north1975-exact north1975-branches
step ensemble ensemble-lhs lhs-ensemble
step regimes regimes-classic classic-regimes
echo "gallery: $(du -sh "$OUT" | cut -f1) in $OUT" >&2
