#!/bin/bash
# Slurm job: rerun flagged entries of a catalogue at a higher resolution, as a new run whose
# results then win in the summary view (it shows each material's most resolved successful run).
# The default selection takes the doubtful entries; change WHERE for other flags, e.g.
#   WHERE="class = 'Weyl semimetal'"  or  WHERE="gap_indirect_ev BETWEEN 0 AND 0.01".
# Fewer entries, each dearer: the same ranks rule as screen (cores + 1).
# Defaults are the command's own: without MESH each entry is rerun at twice the mesh of its best
# result (never coarser or equal); MESH and MATERIAL_SECONDS are passed only when set. Ids that the
# selection names but the set lacks are warned about in the log.
#SBATCH --job-name=bandsieve-rescreen
#SBATCH --nodes=1
#SBATCH --ntasks=17
#SBATCH --time=02:00:00
#SBATCH --output=bandsieve-rescreen-%j.log

set -euo pipefail
SET=${SET:-materials.h5}
CAT=${CAT:-catalogue.sqlite}
WHERE=${WHERE:-"confidence < 0.7 OR status IN ('failed', 'timeout')"}
EXTRA=()
[ -n "${MESH:-}" ] && EXTRA+=(--mesh "$MESH")
[ -n "${MATERIAL_SECONDS:-}" ] && EXTRA+=(--material-seconds "$MATERIAL_SECONDS")
# Slurm's limit in seconds minus a 5-minute margin, as in slurm-screen.sh.
LIMIT=$(( $(squeue -h -j "$SLURM_JOB_ID" -o %L | awk -F'[-:]' '{ if (NF==4) print ($1*86400+$2*3600+$3*60+$4); else if (NF==3) print ($1*3600+$2*60+$3); else print ($1*60+$2) }') - 300 ))
export OPENBLAS_NUM_THREADS=1
srun bandsieve rescreen "$SET" -c "$CAT" --where "$WHERE" "${EXTRA[@]}" --max-seconds "$LIMIT"
