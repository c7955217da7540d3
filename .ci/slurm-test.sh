#!/usr/bin/env bash
# The cluster path on a real scheduler: start a single-node SLURM (Debian's
# slurmctld, slurmd, slurm-client and munge, 22.05) by hand, without systemd
# or cgroups (proctrack/linuxproc, task/none, no accounting), submit the
# array script that `tauvox batch --slurm-script` writes for the committed
# two-participant dataset testdata/bids, and check that
#   1. every array task succeeds,
#   2. the derivative dataset equals one plain `tauvox batch` run (same
#      files; maps and sidecars byte-identical after gunzip; provenance equal
#      apart from timings),
#   3. a resubmission rewrites nothing (no file's inode, size or mtime
#      changes) and each task reports its series up to date.
# Everything (munge key and socket, slurm.conf, state, spool, logs) lives in
# a temporary folder; the daemons started here are stopped by their process
# ids on exit. Needs root (to install the packages and run slurmd); skipped
# with a message otherwise. Every wait is bounded: the script cannot hang.
set -euo pipefail
cd "$(dirname "$0")/.."
REPO=$PWD

if [ "$(id -u)" != 0 ]; then
	echo "slurm-test: SKIPPED: not root (installing SLURM and running slurmd need root)"
	exit 0
fi

need=()
for p in slurmctld slurmd slurm-client munge; do
	dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || need+=("$p")
done
if [ ${#need[@]} -gt 0 ]; then
	echo "slurm-test: installing ${need[*]}"
	export DEBIAN_FRONTEND=noninteractive
	timeout 600 apt-get install -y -q "${need[@]}" >/dev/null 2>&1 ||
		{ timeout 300 apt-get update -q >/dev/null && timeout 600 apt-get install -y -q "${need[@]}" >/dev/null; }
fi
# Package post-install scripts may start the distribution's own daemons
# where an init system runs; they are left alone (we use our own ports,
# key, socket and configuration).

T=$(mktemp -d /tmp/tauvox-slurm.XXXXXX)
chmod 755 "$T"
PIDS=()
cleanup() {
	local rc=$?
	for f in "$T/slurmd.pid" "$T/slurmctld.pid" "$T/munged.pid"; do
		if [ -s "$f" ]; then
			pid=$(cat "$f")
			kill "$pid" 2>/dev/null || true
			for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
			kill -9 "$pid" 2>/dev/null || true
		fi
	done
	if [ $rc -ne 0 ]; then
		echo "slurm-test: FAILED; daemon logs follow" >&2
		for l in "$T"/slurmctld.log "$T"/slurmd.log "$T"/munged.log "$T"/out-*.log; do
			[ -f "$l" ] && { echo "== $l" >&2; tail -n 30 "$l" >&2; }
		done
	fi
	rm -rf "$T"
	exit $rc
}
trap cleanup EXIT
trap 'exit 1' INT TERM

fail() { echo "slurm-test: FAIL: $*" >&2; exit 1; }

# munge: a private key and socket, run as root.
mkdir -p "$T/munge"
chmod 711 "$T/munge"
dd if=/dev/urandom of="$T/munge/munge.key" bs=1024 count=1 status=none
chmod 400 "$T/munge/munge.key"
/usr/sbin/munged --force --key-file="$T/munge/munge.key" --socket="$T/munge/munge.socket" \
	--pid-file="$T/munged.pid" --log-file="$T/munged.log" --seed-file="$T/munge/munge.seed"
for _ in $(seq 50); do [ -S "$T/munge/munge.socket" ] && break; sleep 0.2; done
[ -S "$T/munge/munge.socket" ] || fail "munged did not start"

# slurm.conf for one node: this machine's CPUs and memory as slurmd sees them.
host=$(hostname -s)
node=$(/usr/sbin/slurmd -C | head -n 1)
cpus=$(sed -n 's/.* CPUs=\([0-9]*\).*/\1/p' <<<"$node")
mem=$(sed -n 's/.* RealMemory=\([0-9]*\).*/\1/p' <<<"$node")
mkdir -p "$T/state" "$T/spool"
cat >"$T/slurm.conf" <<EOF
ClusterName=tauvoxci
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=16817
SlurmdPort=16818
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket=$T/munge/munge.socket
CredType=cred/munge
StateSaveLocation=$T/state
SlurmdSpoolDir=$T/spool
SlurmctldPidFile=$T/slurmctld.pid
SlurmdPidFile=$T/slurmd.pid
SlurmctldLogFile=$T/slurmctld.log
SlurmdLogFile=$T/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
MpiDefault=none
ReturnToService=2
SlurmdTimeout=30
InactiveLimit=0
KillWait=5
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=ci Nodes=$host Default=YES MaxTime=30 State=UP
EOF
export SLURM_CONF=$T/slurm.conf
/usr/sbin/slurmctld -f "$SLURM_CONF"
/usr/sbin/slurmd -f "$SLURM_CONF"
up=""
for _ in $(seq 60); do
	if timeout 5 sinfo -h -N -o '%T' 2>/dev/null | grep -Eq '^(idle|mixed|allocated)'; then up=1; break; fi
	sleep 0.5
done
[ -n "$up" ] || fail "the node did not come up within 30 s ($(timeout 5 sinfo -h -N -o '%T %E' 2>&1 || true))"
echo "slurm-test: single-node SLURM up ($(timeout 5 sinfo -h -N -o '%N %c CPUs %m MB %T'))"

# tauvox, the generated array script, and the plain run to compare with.
go build -o "$T/bin/tauvox" ./cmd/tauvox
BIDS=$REPO/testdata/bids
"$T/bin/tauvox" batch "$BIDS" --out "$T/deriv-slurm" --slurm-script "$T/job.sh" \
	--slurm-cpus 1 --slurm-mem 500M --slurm-time 00:10:00
grep -q '^#SBATCH --array=1-2$' "$T/job.sh" || fail "array range is not 1-2 for two participants: $(grep array "$T/job.sh")"
"$T/bin/tauvox" batch "$BIDS" --out "$T/deriv-plain" --workers 1 --quiet >/dev/null

submit() { # $1: tag. Submits job.sh, waits (bounded) and checks every task completed.
	local id state
	id=$(timeout 30 sbatch --parsable --chdir="$T" --output="$T/out-$1-%a.log" "$T/job.sh") ||
		fail "sbatch refused the script"
	id=${id%%;*}
	for _ in $(seq 300); do
		state=$(timeout 10 squeue -h -j "$id" -o '%T' 2>/dev/null || true)
		[ -z "$state" ] && break
		sleep 1
	done
	[ -z "$state" ] || { timeout 10 scancel "$id" || true; fail "job $id still $state after 300 s"; }
	# Without accounting, a finished task's exit code is in its output:
	# tauvox batch --quiet prints its summary line last.
	for a in 1 2; do
		grep -q '^batch .*0 failed' "$T/out-$1-$a.log" ||
			fail "task $a of job $id did not finish cleanly: $(cat "$T/out-$1-$a.log" 2>/dev/null)"
	done
	echo "slurm-test: job $id ($1): both array tasks finished"
}
submit first

# 2. Same dataset as one plain run.
(cd "$T/deriv-plain" && find . -type f | sort) >"$T/plain.list"
(cd "$T/deriv-slurm" && find . -type f | sort) >"$T/slurm.list"
diff -u "$T/plain.list" "$T/slurm.list" || fail "the derivative datasets hold different files"
nfiles=0
while read -r f; do
	a=$T/deriv-plain/$f b=$T/deriv-slurm/$f
	case "$f" in
	*.nii.gz) cmp -s <(gzip -dc "$a") <(gzip -dc "$b") || fail "$f differs" ;;
	*provenance.json)
		# Only when it ran ("created") and how long it took ("timings_s")
		# may differ; the file is indented JSON written by tauvox.
		strip() { sed -e '/^  "created": /d' -e '/^  "timings_s": {/,/^  }/d' "$1"; }
		cmp -s <(strip "$a") <(strip "$b") || { diff <(strip "$a") <(strip "$b") >&2; fail "$f differs beyond its time and timings"; }
		;;
	*) cmp -s "$a" "$b" || fail "$f differs" ;;
	esac
	nfiles=$((nfiles + 1))
done <"$T/plain.list"
echo "slurm-test: derivative dataset of the array job equals the plain batch run ($nfiles files)"

# 3. A resubmission rewrites nothing.
snap() { (cd "$T/deriv-slurm" && find . -type f -printf '%p %i %s %T@\n' | sort); }
snap >"$T/before"
sleep 1.1
submit again
snap >"$T/after"
diff -u "$T/before" "$T/after" || fail "the resubmission rewrote files"
for a in 1 2; do
	grep -q ' 0 fitted, [1-9][0-9]* up to date, 0 failed' "$T/out-again-$a.log" ||
		fail "task $a of the resubmission fitted again: $(cat "$T/out-again-$a.log")"
done
echo "slurm-test: resubmission rewrote nothing ($(wc -l <"$T/after") files unchanged)"
echo "slurm-test: PASS"
