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
# Only the .nc files of steps marked "keep" stay (small ones); the others are drawn and
# removed, so that the gallery stays under 5 MB.
# Pictures per file kind (`icefold plot`): run -> NAME-timeseries, NAME-map, NAME-profile;
# equilibrium -> NAME-profile, NAME-spectrum; sweep and branches -> NAME-hysteresis;
# ensemble -> NAME-spread, NAME-outcomes; regimes -> NAME-map.

step() { # command config name keep|drop
  local cmd="$1" cfg="configs/$2.toml" name="$3" keep="$4"
  shift 4
  local nc="$OUT/$name.nc"
  echo "gallery: icefold $cmd $cfg -> $nc" >&2
  "$BIN" "$cmd" "$cfg" -o "$nc" --overwrite "$@"
  "$BIN" plot "$nc" --out-dir "$OUT" 2>/dev/null
  if [ "$keep" != keep ]; then rm -f "$nc"; fi
}

if [ "${GALLERY_ONLY:-}" = "" ]; then
  "$BIN" demo --out-dir "$OUT" 2>/dev/null
fi
step run classic-step-albedo classic-run drop
step equilibrium classic-step-albedo classic-equilibrium keep
step run smooth-albedo smooth-run drop
step run gray-body gray-body-run drop
step run global-mean global-mean-run drop
step run emission-level-co2 emission-level-run drop
step run globe-with-land globe-land-run drop
step run seasonal-globe seasonal-run drop
step run forcing-orvane orvane-run drop
step sweep sweep-solar solar-sweep drop
step branches branches-solar solar-branches drop
step branches branches-co2 co2-branches drop
step branches north1975-exact north1975-branches drop
step ensemble ensemble-lhs lhs-ensemble drop
step regimes regimes-classic classic-regimes keep
echo "gallery: $(du -sh "$OUT" | cut -f1) in $OUT" >&2
