#!/usr/bin/env bash
# Side-by-side benchmark (not a test): effective samples of e per second per core of
# `eccaudit priors` (one default run, uniform e prior, no jitter) against emcee with a numpy
# model on the same posterior and the same table, and their ratio.
#
# Usage: bash scripts/bench-emcee.sh [VENV_DIR [ROUNDS]]
#   VENV_DIR: default a throw-away directory under /tmp (an existing one is reused);
#   ROUNDS: side-by-side rounds (eccaudit then emcee), default 1.
#   ECCAUDIT_BIN=PATH: use that eccaudit build instead of building target/release/eccaudit.
#
# emcee and numpy are installed from PyPI into a fresh virtual environment (pinned versions
# below); eccaudit is built with `cargo build --release`. The table is simulated here with a
# fixed seed: one Keplerian, P = 23.7 d, K = 30 m/s, e = 0.35, 40 random epochs over a year,
# sigma = 3 m/s. emcee runs 32 walkers x 5000 steps (the reference of issue 13), single thread;
# tau_e by emcee.autocorr.integrated_time on the last 4000 steps; ESS = draws / tau_e, divided
# by the time of run_mcmc alone (generous to emcee: its start and summary are not timed).
# eccaudit's figure times the whole run (least-squares start, sampling, diagnostics, summary)
# and uses the same tau estimator (walker-averaged, Sokal window c = 5). Both sides are timed
# by wall clock and by CPU time (emcee: time.process_time, all threads of the process, numpy
# held to one thread; eccaudit: its thread's CPU time); the ratio is per CPU second (per core),
# which other processes' load on a shared machine does not change; the wall-clock ratio is
# printed beside it.
set -euo pipefail
cd "$(dirname "$0")/.."
VENV="${1:-$(mktemp -d /tmp/eccaudit-emcee-XXXXXX)}"
ROUNDS="${2:-1}"
export OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1
python3 -m venv "$VENV"
"$VENV/bin/pip" install --quiet "numpy==2.2.6" "emcee==3.1.6"
# ECCAUDIT_BIN=path uses a given build instead (e.g. to compare two builds in one session).
BIN="${ECCAUDIT_BIN:-target/release/eccaudit}"
[ -n "${ECCAUDIT_BIN:-}" ] || cargo build --release --quiet
TABLE="$VENV/bench-table.csv"
"$VENV/bin/python" - "$TABLE" <<'PY'
import sys
import numpy as np
rng = np.random.default_rng(20261203)
P, K, e, w, tp, gamma, sigma = 23.7, 30.0, 0.35, 1.1, 2459005.0, -12.0, 3.0
t = np.sort(2459000.0 + 365.0 * rng.random(40))
M = 2 * np.pi * (t - tp) / P
E = M.copy()
for _ in range(60):
    E = E - (E - e * np.sin(E) - M) / (1 - e * np.cos(E))
nu = 2 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
v = K * (np.cos(nu + w) + e * np.cos(w)) + gamma + sigma * rng.standard_normal(40)
with open(sys.argv[1], "w") as f:
    f.write("time [BJD],rv [m/s],rv_err [m/s]\n")
    for ti, vi in zip(t, v):
        f.write(f"{ti:.6f},{vi:.4f},{sigma}\n")
PY
for round in $(seq 1 "$ROUNDS"); do
[ "$ROUNDS" -gt 1 ] && echo "round $round of $ROUNDS"
OURS=$("$BIN" bench --ess "$TABLE" --json --repeats 3)
"$VENV/bin/python" - "$TABLE" "$OURS" <<'PY'
import json, sys, time
import numpy as np
import emcee
data = np.loadtxt(sys.argv[1], delimiter=",", skiprows=1)
t, v, s = data[:, 0], data[:, 1], data[:, 2]
ours = json.loads(sys.argv[2])
t_ref = 0.5 * (t.min() + t.max())
ivar = 1.0 / s**2
# The posterior of eccaudit priors --priors uniform --no-jitter: (P, K, h, k, lambda, gamma),
# h = sqrt(e) cos w, k = sqrt(e) sin w, lambda = M0 + w at t_ref; P log-uniform on [1, 1e4],
# K modified Jeffreys (knee 1) on [0, 2e5], e uniform on [0, 0.99] (flat in (h, k) inside the
# disk), lambda uniform over one turn, gamma uniform on +-3e5.
lam0 = None
def log_prob(x):
    P, K, h, k, lam, gamma = x
    e = h * h + k * k
    if not (1 <= P <= 1e4 and 0 <= K <= 2e5 and e < 0.99 and abs(lam - lam0) <= np.pi
            and abs(gamma) <= 3e5):
        return -np.inf
    w = np.arctan2(k, h)
    M = lam - w + 2 * np.pi * (t - t_ref) / P
    E = M.copy()
    for _ in range(30):
        E = E - (E - e * np.sin(E) - M) / (1 - e * np.cos(E))
    nu = 2 * np.arctan2(np.sqrt(1 + e) * np.sin(E / 2), np.sqrt(1 - e) * np.cos(E / 2))
    model = K * (np.cos(nu + w) + e * np.cos(w)) + gamma
    return -np.log(P) - np.log(K + 1.0) - 0.5 * np.sum((v - model) ** 2 * ivar)
# Start: a small ball around the simulated truth (emcee's usual practice).
P, K, e, w, tp, gamma = 23.7, 30.0, 0.35, 1.1, 2459005.0, -12.0
lam0 = (2 * np.pi * (t_ref - tp) / P + w + np.pi) % (2 * np.pi) - np.pi
x0 = np.array([P, K, np.sqrt(e) * np.cos(w), np.sqrt(e) * np.sin(w), lam0, gamma])
rng = np.random.default_rng(1)
scale = np.array([1e-3, 0.3, 0.01, 0.01, 0.01, 0.3])
p0 = x0 + scale * rng.standard_normal((32, 6))
sampler = emcee.EnsembleSampler(32, 6, log_prob)
started, cpu_started = time.perf_counter(), time.process_time()
sampler.run_mcmc(p0, 5000)
seconds = time.perf_counter() - started
cpu_seconds = time.process_time() - cpu_started
chain = sampler.get_chain(discard=1000)
e_chain = chain[:, :, 2] ** 2 + chain[:, :, 3] ** 2
tau = emcee.autocorr.integrated_time(e_chain[:, :, None], quiet=True)[0]
ess = e_chain.size / tau
rate, cpu_rate = ess / seconds, ess / cpu_seconds
print(f"emcee {emcee.__version__} + numpy {np.__version__}: ESS(e) {ess:.0f} in {cpu_seconds:.1f} s CPU "
      f"({seconds:.1f} s wall) = {cpu_rate:.1f} per CPU second (tau_e {tau:.1f} steps, "
      f"median e {np.median(e_chain):.4f})")
print(f"eccaudit: ESS(e) {ours['ess_e']:.0f} in {ours['cpu_seconds']:.3f} s CPU "
      f"({ours['seconds']:.3f} s wall) = {ours['ess_per_cpu_second']:.0f} per CPU second "
      f"(tau_e {ours['tau_e_steps']:.1f} steps, {ours['draws']} draws, "
      f"{100 * ours['overhead_fraction']:.0f} % outside the log-density, "
      f"median e {ours['median_e']:.4f}, converged {ours['converged']})")
print(f"ratio per CPU second: {ours['ess_per_cpu_second'] / cpu_rate:.0f}x "
      f"(wall clock: {ours['ess_per_second'] / rate:.0f}x)")
PY
done
