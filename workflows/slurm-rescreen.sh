#!/bin/bash
# Slurm job: rerun flagged entries of a catalogue at a higher resolution, as a new run whose
# results then win in the summary view (it shows each material's most resolved successful run).
# The default selection takes the doubtful entries; change WHERE for other flags, e.g.
#   WHERE="class = 'Weyl semimetal'"  or  WHERE="gap_indirect_ev BETWEEN 0 AND 0.01".
# Fewer entries, each dearer: the same ranks rule as screen (cores + 1), longer per-material budget.
#SBATCH --job-name=bandsieve-rescreen
#SBATCH --nodes=1
#SBATCH --ntasks=17
#SBATCH --time=02:00:00
#SBATCH --output=bandsieve-rescreen-%j.log

set -euo pipefail
SET=${SET:-materials.h5}
CAT=${CAT:-catalogue.sqlite}
WHERE=${WHERE:-"confidence < 0.7 OR status IN ('failed', 'timeout')"}
export OPENBLAS_NUM_THREADS=1
srun bandsieve rescreen "$SET" -c "$CAT" --where "$WHERE" --mesh "${MESH:-28}" \
     --max-seconds $(( ${SLURM_TIME_SECONDS:-7200} - 300 )) --material-seconds "${MATERIAL_SECONDS:-1800}"
