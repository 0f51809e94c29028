#!/bin/bash
# Submits a dosecover audit to Slurm: N shard tasks as one job array, then
# one merge that starts when every shard task has ended well.
#   usage: bash audit-slurm.sh CASES_DIR OUT_DIR N [SETTINGS_FILE]
# AUDIT_ARRAY=3,5 (Slurm's --array syntax) submits only those shards, to run
# again the ones that failed (with --resume, their finished cases are kept).
# CASES_DIR, OUT_DIR and SETTINGS_FILE must be paths every node sees the
# same way (a shared file system; OUT_DIR's must rename files atomically).
# Slurm writes its logs into the folder sbatch is called from.
set -euo pipefail
if [ $# -lt 3 ] || [ $# -gt 4 ]; then
  echo "usage: bash $0 CASES_DIR OUT_DIR N [SETTINGS_FILE]" >&2
  exit 2
fi
export AUDIT_CASES=$1 AUDIT_OUT=$2 AUDIT_SHARDS=$3 AUDIT_SETTINGS=${4:-}
array=${AUDIT_ARRAY:-1-$AUDIT_SHARDS}

shards=$(sbatch --parsable --array="$array" <<'EOF'
#!/bin/bash
#SBATCH --job-name=dosecover-shard
#SBATCH --cpus-per-task=2
#SBATCH --mem=1G
#SBATCH --output=dosecover-shard-%A_%a.log
i=$SLURM_ARRAY_TASK_ID n=$AUDIT_SHARDS
dosecover audit "$AUDIT_CASES" -o "$AUDIT_OUT" ${AUDIT_SETTINGS:+--settings "$AUDIT_SETTINGS"} \
  --shard "$i/$n" --workers "$SLURM_CPUS_PER_TASK" --resume &
pid=$!
rc=0
wait "$pid" || rc=$?
# Exit code 1 from a shard this process finished means some case is
# incomplete or failed: the merge lists it in errors.csv, so the task is done.
state="$AUDIT_OUT/shard-$i-of-$n.json"
if [ "$rc" -eq 1 ] && grep -q "\"pid\": $pid," "$state" && grep -q '"state": "finished"' "$state"; then
  exit 0
fi
exit "$rc"
EOF
)
merge=$(sbatch --parsable --job-name=dosecover-merge --dependency=afterok:"$shards" \
  --cpus-per-task=1 --mem=256M --output=dosecover-merge-%j.log \
  --wrap 'dosecover audit merge "$AUDIT_OUT"')
echo "shards: job $shards (array $array of $AUDIT_SHARDS); merge: job $merge, after the shards end well"
