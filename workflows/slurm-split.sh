#!/bin/bash
# Slurm array job: a very large set split over several jobs, each screening its own part into its
# own catalogue (no two jobs ever write the same SQLite file). Prepare the parts once with
#   bandsieve pack -o part-0.h5 cards-0/*.json ; bandsieve pack -o part-1.h5 cards-1/*.json ...
# (or one `pack` per directory of cards), submit with
#   sbatch --array=0-7 workflows/slurm-split.sh
# and merge afterwards into one catalogue:
#   bash workflows/merge-catalogues.sh merged.sqlite part-*.sqlite
#SBATCH --job-name=bandsieve-part
#SBATCH --nodes=1
#SBATCH --ntasks=33
#SBATCH --time=04:00:00
#SBATCH --output=bandsieve-part-%A-%a.log

set -euo pipefail
PART=${SLURM_ARRAY_TASK_ID:?submit as an array job}
export OPENBLAS_NUM_THREADS=1
srun bandsieve screen "part-$PART.h5" -c "part-$PART.sqlite" --mesh "${MESH:-14}" \
     --max-seconds $(( ${SLURM_TIME_SECONDS:-14400} - 300 )) --material-seconds "${MATERIAL_SECONDS:-600}"
