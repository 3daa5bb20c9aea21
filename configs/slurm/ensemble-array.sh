#!/bin/bash
# Run an icefold ensemble as a Slurm job array: array task K of N runs `--shard K/N`, a
# deterministic slice of the members; `icefold merge` then joins the shard files into exactly
# the file one `icefold ensemble` run would write.
#
# Usage (N shards):
#   sbatch --array=0-$((N-1)) configs/slurm/ensemble-array.sh CONFIG [OUTDIR]
#   icefold merge OUTDIR/shard-*.nc -o ensemble.nc
# or chain the merge after the array:
#   jid=$(sbatch --parsable --array=0-7 configs/slurm/ensemble-array.sh cfg.toml shards)
#   sbatch --dependency=afterok:$jid --wrap "icefold merge shards/shard-*.nc -o ensemble.nc"
#
# Environment: ICEFOLD_BIN (default: icefold on PATH); ICEFOLD_SHARDS overrides N (default:
# the array's task count, right for --array=0-(N-1)); each task uses its allocated CPUs
# (RAYON_NUM_THREADS = SLURM_CPUS_PER_TASK). Edit the #SBATCH lines for your cluster.
#SBATCH --job-name=icefold-ensemble
#SBATCH --array=0-7
#SBATCH --cpus-per-task=2
#SBATCH --time=01:00:00
#SBATCH --output=icefold-ensemble-%A_%a.log

set -euo pipefail

config=${1:?usage: sbatch --array=0-(N-1) ensemble-array.sh CONFIG [OUTDIR]}
outdir=${2:-icefold-shards}
icefold=${ICEFOLD_BIN:-icefold}
k=${SLURM_ARRAY_TASK_ID:?not inside a Slurm job array (submit with sbatch --array=0-(N-1))}
n=${ICEFOLD_SHARDS:-${SLURM_ARRAY_TASK_COUNT:?Slurm did not set SLURM_ARRAY_TASK_COUNT; set ICEFOLD_SHARDS=N}}
export RAYON_NUM_THREADS=${SLURM_CPUS_PER_TASK:-1}

mkdir -p "$outdir"
out=$(printf '%s/shard-%05d-of-%05d.nc' "$outdir" "$k" "$n")
echo "icefold ensemble $config --shard $k/$n -> $out on $(hostname) with $RAYON_NUM_THREADS threads"
exec "$icefold" ensemble "$config" --shard "$k/$n" -o "$out" --overwrite
