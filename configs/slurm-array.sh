#!/bin/bash
# stria comparison as a Slurm job array: one array task per Slurm task.
# Submit:  sbatch this-script.sh
# Then, when every task has finished:  stria gather COMPARE_FOLDER
# A failed or killed task can be rerun alone (sbatch --array=K this-script.sh);
# units it finished before are not redone.
#SBATCH --job-name=stria-compare
#SBATCH --array=1-40
#SBATCH --cpus-per-task=2
#SBATCH --mem=8G
#SBATCH --time=04:00:00
#SBATCH --output=stria-task-%a-of-40.log
set -euo pipefail
STRIA=${STRIA:-stria}
"$STRIA" compare --config "/path/to/many.yaml" --out "/path/to/stria-out/compare" --array-task "${SLURM_ARRAY_TASK_ID}" --array-task-count 40 --quiet
# gather afterwards: "$STRIA" gather "/path/to/stria-out/compare"
