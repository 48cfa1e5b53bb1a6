#!/usr/bin/env bash
# A SLURM array job that spreads a Spindrift sweep over 8 nodes: task I of N runs the
# sweep points with index mod N == I, all writing into one folder on a shared filesystem.
#
#   sbatch examples/sweep-array.sh            # submit; resubmit the same way to resume
#   spindrift merge runs/thickness-sweep      # once every task has finished
#
# --max-wall stops each task with a checkpoint ten minutes before SLURM's limit; a task
# that is stopped exits 75 and the next submission resumes its point where it stopped.
# Points that finished are skipped. Results do not depend on which task ran a point.
#SBATCH --job-name=spindrift-sweep
#SBATCH --array=0-7
#SBATCH --nodes=1
#SBATCH --ntasks=1
#SBATCH --cpus-per-task=32
#SBATCH --time=24:00:00
#SBATCH --signal=TERM@300
set -euo pipefail

N=${SLURM_ARRAY_TASK_COUNT:-8}
I=${SLURM_ARRAY_TASK_ID:-0}
SPINDRIFT=${SPINDRIFT:-target/release/spindrift}

exec "$SPINDRIFT" sweep configs/thickness.toml \
  --vary 'lattice.cells=[64,64,1],[64,64,2],[64,64,3],[64,64,4],[64,64,6],[64,64,8],[64,64,12],[64,64,16]' \
  --out runs/thickness-sweep \
  --shard "$I/$N" \
  --threads "${SLURM_CPUS_PER_TASK:-1}" \
  --max-wall 23.8h
