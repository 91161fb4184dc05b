#!/bin/bash
# Slurm job: screen a whole material set into a catalogue.
#
# Ranks: rank 0 only coordinates and writes the catalogue (it sleeps between messages), so ask for
# one task per core plus one: --ntasks = cores + 1 keeps every core computing. Materials are
# handed out one at a time, largest first, so uneven costs balance themselves.
# Time: --max-seconds is set a few minutes under the Slurm limit, so the job stops handing out
# work, commits and marks the run interrupted before Slurm kills it; resubmitting the same script
# resumes (finished materials are skipped). SIGTERM from scancel does the same.
# Defaults are the command's own: the mesh and the per-material budget are passed only when MESH or
# MATERIAL_SECONDS is set, so this job resumes (and is resumed by) a hand-started `screen` with the
# same settings; --max-seconds and --progress-every never change results and never break the match.
#SBATCH --job-name=bandsieve-screen
#SBATCH --nodes=1
#SBATCH --ntasks=33
#SBATCH --cpus-per-task=1
#SBATCH --time=04:00:00
#SBATCH --output=bandsieve-screen-%j.log

set -euo pipefail
SET=${SET:-materials.h5}
CAT=${CAT:-catalogue.sqlite}
EXTRA=()
[ -n "${MESH:-}" ] && EXTRA+=(--mesh "$MESH")
[ -n "${MATERIAL_SECONDS:-}" ] && EXTRA+=(--material-seconds "$MATERIAL_SECONDS")
# Slurm's limit in seconds minus a 5-minute margin for the last materials and the final commit.
LIMIT=$(( $(squeue -h -j "$SLURM_JOB_ID" -o %L | awk -F'[-:]' '{ if (NF==4) print ($1*86400+$2*3600+$3*60+$4); else if (NF==3) print ($1*3600+$2*60+$3); else print ($1*60+$2) }') - 300 ))
export OPENBLAS_NUM_THREADS=1
srun bandsieve screen "$SET" -c "$CAT" "${EXTRA[@]}" --max-seconds "$LIMIT" --progress-every 60
