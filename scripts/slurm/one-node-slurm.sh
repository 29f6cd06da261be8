#!/usr/bin/env bash
# Start (or stop) a throw-away one-node Slurm cluster on this machine, for tests of job-array sharding.
# Verified on the project's machine kind (Debian 12, Slurm 22.05, as root, no systemd).
# Copied from the shared cluster notes (/work/shared/cluster); used by scripts/slurm/test-survey.sh.
#
#   one-node-slurm.sh start DIR   # installs munge + slurm from Debian if missing, writes DIR/slurm.conf,
#                                 # starts munged, slurmctld, slurmd; prints `export SLURM_CONF=...`
#   one-node-slurm.sh stop DIR    # stops the daemons it started (by their pid files)
#
# Then: SLURM_CONF=DIR/slurm.conf sbatch --wait --array=0-3 job.sh
# Notes: no cgroup.conf (Slurm 22.05 has no "disabled" cgroup plugin; without the file it runs);
# proctrack/linuxproc and task/none avoid cgroups; the mpi/pmix error in slurmd.log is harmless.
set -euo pipefail
cmd=${1:?start|stop}; dir=$(mkdir -p "${2:?DIR}" && cd "$2" && pwd)
if [[ $cmd == stop ]]; then
  for p in slurmd slurmctld; do [[ -f $dir/$p.pid ]] && kill "$(cat "$dir/$p.pid")" 2>/dev/null || true; done
  [[ -f $dir/munged.pid ]] && kill "$(cat "$dir/munged.pid")" 2>/dev/null || true
  exit 0
fi
if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  apt-get update -qq
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends slurmctld slurmd slurm-client munge >/dev/null
fi
mkdir -p "$dir"/{state,spool,log} /run/munge
chown munge:munge /run/munge
[[ -f /etc/munge/munge.key ]] || mungekey -c
if ! munge -n 2>/dev/null | unmunge >/dev/null 2>&1; then
  su -s /bin/sh munge -c "munged --pid-file=/run/munge/munged.pid"
  cp /run/munge/munged.pid "$dir/munged.pid" 2>/dev/null || true
fi
host=$(hostname -s)
cat > "$dir/slurm.conf" <<CONF
ClusterName=local
SlurmctldHost=$host(127.0.0.1)
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
StateSaveLocation=$dir/state
SlurmdSpoolDir=$dir/spool
SlurmctldPidFile=$dir/slurmctld.pid
SlurmdPidFile=$dir/slurmd.pid
SlurmctldLogFile=$dir/log/slurmctld.log
SlurmdLogFile=$dir/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
ReturnToService=2
NodeName=$host NodeAddr=127.0.0.1 CPUs=$(nproc) RealMemory=$(( $(free -m | awk '/Mem:/{print $2}') * 8 / 10 )) State=UNKNOWN
PartitionName=main Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
export SLURM_CONF=$dir/slurm.conf
slurmctld -f "$SLURM_CONF"
for _ in $(seq 20); do scontrol ping >/dev/null 2>&1 && break; sleep 0.5; done
slurmd -f "$SLURM_CONF"
for _ in $(seq 40); do sinfo -h -o %t 2>/dev/null | grep -q idle && break; sleep 0.5; done
sinfo -h -o %t | grep -q idle || { echo "slurm node did not come up; see $dir/log" >&2; exit 1; }
echo "export SLURM_CONF=$SLURM_CONF"
