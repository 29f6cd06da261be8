#!/usr/bin/env bash
# Survey timing (a benchmark, not a test): N simulated 40-epoch one-companion tables
# (examples/make_survey_tables.rs, seed 1) audited with the default audit except the trial count
# (TRIALS per true e; the default audit has 200), first in one process on all cores, then as
# 1-, 2- and 4-task Slurm job arrays (one CPU per task) on a one-node cluster; each merged
# catalogue is checked byte for byte against the one-process run. Root only (starts Slurm).
#
#   TRIALS=10 N=100 bash scripts/slurm/bench-survey.sh [WORKDIR]
set -euo pipefail
cd "$(dirname "$0")/../.."
ROOT=$(pwd)
N=${N:-100}
TRIALS=${TRIALS:-10}
cargo build --release --quiet --bin eccaudit --example make_survey_tables
W=${1:-$(mktemp -d /tmp/eccaudit-bench.XXXXXX)}
mkdir -p "$W"; W=$(cd "$W" && pwd)
# A copy of the binary, so a rebuild while the benchmark runs changes nothing.
cp "$ROOT/target/release/eccaudit" "$W/eccaudit"
B=$W/eccaudit
rm -rf "$W"/data "$W"/local "$W"/array-*
"$ROOT/target/release/examples/make_survey_tables" "$W/data" "$N" 40 1 >/dev/null
FLAGS=(--trials "$TRIALS")
now() { date +%s.%N; }
secs() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.1f", b - a }'; }

t0=$(now)
(cd "$W" && "$B" survey data/manifest.csv --out local "${FLAGS[@]}" --quiet >/dev/null)
t1=$(now)
echo "one process, $(nproc) threads: $N tables x 13 e x $TRIALS trials: $(secs "$t0" "$t1") s"

bash scripts/slurm/one-node-slurm.sh start "$W/slurm" >/dev/null
trap 'bash "$ROOT/scripts/slurm/one-node-slurm.sh" stop "$W/slurm"' EXIT
export SLURM_CONF=$W/slurm/slurm.conf
for tasks in 1 2 4; do
  (cd "$W" && "$B" survey data/manifest.csv --out "array-$tasks" "${FLAGS[@]}" --write-sbatch "$tasks" --cpus-per-task 1 > "job-$tasks.sh")
  t0=$(now)
  (cd "$W" && sbatch --wait --quiet "job-$tasks.sh")
  "$B" merge "$W/array-$tasks" --out "$W/array-$tasks" >/dev/null
  t1=$(now)
  cmp "$W/local/catalogue.csv" "$W/array-$tasks/catalogue.csv"
  cmp "$W/local/catalogue.json" "$W/array-$tasks/catalogue.json"
  echo "Slurm array of $tasks task(s), 1 CPU each, + merge: $(secs "$t0" "$t1") s (catalogue identical)"
done
