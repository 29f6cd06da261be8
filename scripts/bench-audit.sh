#!/usr/bin/env bash
# Times the default audit of a one-companion, 40-epoch table (issue 11's speed target:
# ≤ 15 s native on 2 cores). The table is made here with a fixed seed (40 random epochs over
# 400 d, P = 12.4 d, K = 10 m/s, e = 0.15, ω = 60°, σ = 3 m/s), so every run times the same work.
#
#   bash scripts/bench-audit.sh [RUNS] [--page]   (default 3 runs; needs target/release/eccaudit;
#                                                 --page also times the page with 2 workers, needs www/pkg)
set -euo pipefail
cd "$(dirname "$0")/.."
RUNS="${1:-3}"
PAGE=""
for a in "$@"; do [ "$a" = "--page" ] && PAGE=1; done
[ "$RUNS" = "--page" ] && RUNS=3
CLI="${CARGO_TARGET_DIR:-target}/release/eccaudit"
TMP="$(mktemp -d)"
trap 'rm -rf "$TMP"' EXIT
python3 - "$TMP/bench40.csv" <<'PY'
import math, random, sys
random.seed(40)
P, K, e, w, tp, sigma = 12.4, 10.0, 0.15, math.radians(60.0), 2460000.0, 3.0
def rv(t):
    M = 2 * math.pi * (t - tp) / P
    E = M
    for _ in range(50):
        E = E - (E - e * math.sin(E) - M) / (1 - e * math.cos(E))
    nu = 2 * math.atan2(math.sqrt(1 + e) * math.sin(E / 2), math.sqrt(1 - e) * math.cos(E / 2))
    return K * (math.cos(nu + w) + e * math.cos(w))
times = sorted(2460000.0 + 400.0 * random.random() for _ in range(40))
with open(sys.argv[1], "w") as f:
    f.write("time [BJD],rv [m/s],error [m/s]\n")
    for t in times:
        f.write(f"{t:.5f},{rv(t) + random.gauss(0, sigma):.3f},{sigma}\n")
PY
# Wall time depends on the machine's other load; the CPU time (user + system) does not, and
# divided by 2 it is the wall time on 2 otherwise idle cores.
TIMEFORMAT='%R %U %S'
for i in $(seq 1 "$RUNS"); do
  t=$( { time "$CLI" audit "$TMP/bench40.csv" --threads 2 --quiet --out "$TMP/run$i" > "$TMP/run$i.txt"; } 2>&1 )
  read -r wall user sys <<< "$t"
  trials=$(python3 -c "import json;r=json.load(open('$TMP/run$i/statement.json'));print(r['extra_trials'])")
  printf 'run %d: %s s wall, %.1f s CPU (adaptive trials: %s)\n' "$i" "$wall" "$(echo "$user + $sys" | bc)" "$trials"
done
sed -n '1,6p' "$TMP/run1.txt"
if [ -n "$PAGE" ]; then
  for i in $(seq 1 "$RUNS"); do
    node scripts/bench-page.mjs --table "$TMP/bench40.csv" --defaults
  done
fi
