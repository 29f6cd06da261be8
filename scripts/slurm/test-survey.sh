#!/usr/bin/env bash
# Sharding on a real Slurm cluster, end to end: starts a one-node cluster from Debian's packages
# (scripts/slurm/one-node-slurm.sh), then
#   1. a survey of 8 simulated tables as a 4-task job array (the script `eccaudit survey
#      --write-sbatch 4` writes), merged with `eccaudit merge`, compared byte for byte with the
#      same survey run on this machine in one process;
#   2. one inject grid as a 4-task array (each task's shard from SLURM_ARRAY_TASK_ID), merged,
#      finished with --resume, compared with a single run;
# and stops the daemons. Needs root and apt-get (to install slurm and munge when missing);
# otherwise it says loudly that it was SKIPPED and exits 0.
#
#   bash scripts/slurm/test-survey.sh [WORKDIR]
set -euo pipefail
cd "$(dirname "$0")/../.."
ROOT=$(pwd)

if [[ $(id -u) != 0 ]] || ! command -v apt-get >/dev/null; then
  echo "!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!" >&2
  echo "!!! SKIPPED: the Slurm job-array test needs root and apt-get (one-node cluster from Debian)" >&2
  echo "!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!" >&2
  exit 0
fi

cargo build --release --quiet --bin eccaudit --example make_survey_tables
B=$ROOT/target/release/eccaudit
W=${1:-$(mktemp -d /tmp/eccaudit-slurm.XXXXXX)}
mkdir -p "$W"
W=$(cd "$W" && pwd)
echo "[slurm test] work folder $W"

"$ROOT/target/release/examples/make_survey_tables" "$W/data" 8 40 11 >/dev/null
FLAGS=(--e 0,0.3 --trials 4 --seed 3 --posterior-walkers 16 --posterior-steps 60 --posterior-burn 30)
GRID=(inject --epochs 24 --baseline 200 --uncertainty 3 --period 11.2 --k 20 --e 0,0.3 --trials 6 --seed 4 --no-posterior)

echo "[slurm test] local runs"
(cd "$W" && "$B" survey data/manifest.csv --out local "${FLAGS[@]}" --quiet >/dev/null)
(cd "$W" && "$B" "${GRID[@]}" --out grid-local --quiet >/dev/null)

echo "[slurm test] starting a one-node cluster"
bash scripts/slurm/one-node-slurm.sh start "$W/slurm" >/dev/null
trap 'bash "$ROOT/scripts/slurm/one-node-slurm.sh" stop "$W/slurm"' EXIT
export SLURM_CONF=$W/slurm/slurm.conf

echo "[slurm test] survey as a 4-task array"
(cd "$W" && "$B" survey data/manifest.csv --out cluster "${FLAGS[@]}" --write-sbatch 4 > survey-job.sh)
(cd "$W" && sbatch --wait --quiet survey-job.sh)
"$B" merge "$W/cluster" --out "$W/merged" >/dev/null
ls "$W"/cluster/slurm-*.log >/dev/null   # the four tasks' logs are there
diff -r "$W/local" "$W/merged"
echo "[slurm test] survey: merged shards equal the local run (catalogue.csv, catalogue.json, every table folder)"

echo "[slurm test] inject grid as a 4-task array"
{
  echo "#!/bin/bash"
  echo "#SBATCH --array=0-3"
  echo "#SBATCH --cpus-per-task=1"
  echo "#SBATCH --output=$W/grid-%a.log"
  echo "cd $W && exec $B ${GRID[*]} --out grid-\$SLURM_ARRAY_TASK_ID --quiet"
} > "$W/grid-job.sh"
(cd "$W" && sbatch --wait --quiet grid-job.sh)
grep -q "running shard 2/4 (from the Slurm job array)" "$W/grid-2.log"
"$B" merge "$W"/grid-0 "$W"/grid-1 "$W"/grid-2 "$W"/grid-3 --out "$W/grid-merged" >/dev/null
(cd "$W" && "$B" "${GRID[@]}" --out grid-merged --resume --quiet >/dev/null)
cmp "$W/grid-local/trials.csv" "$W/grid-merged/trials.csv"
cmp "$W/grid-local/summary.json" "$W/grid-merged/summary.json"
echo "[slurm test] inject: merged shards equal the local run (trials.csv, summary.json)"
echo "[slurm test] passed"
