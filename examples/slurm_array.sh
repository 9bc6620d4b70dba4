#!/bin/bash
# A Slurm job array of cfsweep shards: task I of N computes the blocks with index = I (mod N) into one
# run directory on shared storage. No Dask needed. Submit with
#     sbatch examples/slurm_array.sh                       (defaults below), or e.g.
#     MAX_DEN=2e6 OUT=/shared/runs/q2e6 sbatch --array=0-63 examples/slurm_array.sh
# then, when the array has finished:
#     cfsweep status /shared/runs/q2e6      # missing or bad blocks, if any (rerun those shards)
#     cfsweep table  /shared/runs/q2e6
# Every task must use the same parameters (the first one creates the run; the others resume it; a task
# with other parameters is refused). Rerunning a task is harmless: complete blocks are skipped.
#SBATCH --job-name=cfsweep-shard
#SBATCH --array=0-15
#SBATCH --cpus-per-task=8
#SBATCH --mem=4G
#SBATCH --time=04:00:00
#SBATCH --output=cfsweep-%A_%a.out
set -euo pipefail

: "${MAX_DEN:=1e6}"
: "${FAMILY:=all}"
: "${WORDS:=3}"
: "${CAP:=32}"
: "${OUT:=$PWD/runs/cfsweep-q$MAX_DEN}"
: "${CFSWEEP:=cfsweep}"            # e.g. CFSWEEP="python -m cfsweep"

task="${SLURM_ARRAY_TASK_ID:?run this as a Slurm array task (sbatch --array=...)}"
count="${SLURM_ARRAY_TASK_COUNT:?run this as a Slurm array task (sbatch --array=...)}"
# One Numba thread per booked CPU; the kernel is the only thing running in the task.
export NUMBA_NUM_THREADS="${SLURM_CPUS_PER_TASK:-$(nproc)}"

$CFSWEEP sweep --max-den "$MAX_DEN" --family "$FAMILY" --words "$WORDS" --cap "$CAP" \
    ${BLOCKS:+--blocks "$BLOCKS"} --shard "$task/$count" --out "$OUT" --quiet
