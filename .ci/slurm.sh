# A one-node Slurm cluster for the test of the Slurm example (tests/slurm.rs), sourced by
# .ci/run: `slurm_up` installs Debian's packages when missing and starts munged, slurmctld and
# slurmd (about 20 s); `slurm_down` stops them by the pids in their pid files. Runs as root.
# Written from the measured recipe for this machine kind (Debian 12, Slurm 22.05, no systemd).

SLURM_PIDFILES=(/run/slurmd.pid /run/slurmctld.pid /run/munge/munged.pid)

slurm_up() {
  if ! command -v slurmctld >/dev/null 2>&1 || ! command -v munged >/dev/null 2>&1; then
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends \
      slurmctld slurmd slurm-client munge >/dev/null
  fi
  # munge: the package makes the key; without systemd, /run/munge must be made by hand.
  [ -s /etc/munge/munge.key ] || mungekey --create --force
  chown munge:munge /etc/munge/munge.key && chmod 0400 /etc/munge/munge.key
  install -d -o munge -g munge -m 0755 /run/munge
  # Each daemon is started unless its pid file names a live one (a second run of .ci/run).
  munge -n 2>/dev/null | unmunge >/dev/null 2>&1 || runuser -u munge -- /usr/sbin/munged
  munge -n | unmunge >/dev/null

  local host node
  host="$(hostname -s)"
  node="$(slurmd -C | head -n1)"
  install -d /etc/slurm /var/spool/slurmctld /var/spool/slurmd /var/log/slurm
  cat >/etc/slurm/slurm.conf <<CONF
ClusterName=firemain-ci
SlurmctldHost=$host
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
StateSaveLocation=/var/spool/slurmctld
SlurmdSpoolDir=/var/spool/slurmd
SlurmctldPidFile=/run/slurmctld.pid
SlurmdPidFile=/run/slurmd.pid
SlurmctldLogFile=/var/log/slurm/slurmctld.log
SlurmdLogFile=/var/log/slurm/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
MailProg=/bin/true
ReturnToService=2
$node
PartitionName=debug Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
  slurm_alive /run/slurmctld.pid || slurmctld
  slurm_alive /run/slurmd.pid || slurmd
  local i
  for i in $(seq 1 60); do
    [ "$(sinfo -h -o %t 2>/dev/null | head -n1)" = idle ] && return 0
    sleep 0.5
  done
  echo "slurm: the node did not become idle" >&2
  tail -n 20 /var/log/slurm/slurmctld.log /var/log/slurm/slurmd.log >&2 || true
  return 1
}

slurm_alive() {
  [ -s "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null
}

slurm_down() {
  local f
  for f in "${SLURM_PIDFILES[@]}"; do
    [ -s "$f" ] && kill "$(cat "$f")" 2>/dev/null || true
  done
}
