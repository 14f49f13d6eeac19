#!/bin/bash
# Profile a directory of checkpoints with a SLURM job array, no scheduler needed.
#
# Each array task takes every N-th checkpoint (bondscope batch --shard I/N) and
# uses its allocated cores as local worker processes.  All tasks write into the
# same results directory; a task that is killed or times out can simply be
# resubmitted: finished checkpoints are skipped.
#
#   sbatch --array=0-7 --export=ALL,INPUTS=/scratch/$USER/scan,OUT=/scratch/$USER/scan-profiles \
#          scripts/slurm_batch.sh --renyi 2,inf --bond-dim 64
#
# Resubmitting task 3 alone (add SHARDS, as this one-task array has size 1):
#
#   sbatch --array=3 --export=ALL,SHARDS=8,INPUTS=...,OUT=... scripts/slurm_batch.sh --renyi 2,inf --bond-dim 64
#
# Extra arguments are passed to `bondscope batch` (measures, layout, grouping).
# When the array has finished, one unsharded run writes the combined summary
# and series index (everything is skipped, so it takes seconds):
#
#   sbatch --dependency=afterany:<array job id> --cpus-per-task=1 --export=ALL,INPUTS=...,OUT=... \
#          --wrap 'bondscope batch "$INPUTS" --out "$OUT" --workers 1 --quiet --renyi 2,inf --bond-dim 64'
#
# A task with failed checkpoints exits with status 5, so SLURM marks it FAILED;
# their count ends its log, their rows are in summary.shard-I-of-N.csv.

#SBATCH --job-name=bondscope-batch
#SBATCH --array=0-7
#SBATCH --cpus-per-task=8
#SBATCH --mem-per-cpu=4G
#SBATCH --time=04:00:00
#SBATCH --output=bondscope-batch-%A_%a.log

set -euo pipefail

: "${INPUTS:?set INPUTS to the checkpoint directory (or a quoted glob)}"
: "${OUT:?set OUT to the results directory}"
: "${SLURM_ARRAY_TASK_ID:?submit this script as a job array (sbatch --array=0-7 ...)}"

# Task I of the array is shard I of SHARDS (default: the array's size), so the array
# runs 0..SHARDS-1; a single task resubmitted later (sbatch --array=3) needs SHARDS set.
index=$SLURM_ARRAY_TASK_ID
count=${SHARDS:-${SLURM_ARRAY_TASK_COUNT:?set SHARDS to the number of shards}}
cores=${SLURM_CPUS_PER_TASK:-1}

# One BLAS thread per worker process: the parallelism is across checkpoints.
export OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1

exec bondscope batch "$INPUTS" --out "$OUT" --shard "$index/$count" --workers "$cores" \
    --quiet "$@"
