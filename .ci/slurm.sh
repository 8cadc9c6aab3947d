#!/usr/bin/env bash
# The scale-out proof on the engine users have: installs Slurm and munge
# from the distribution's packages (Debian/Ubuntu: slurm-wlm, munge), starts
# a one-node cluster on localhost, submits the README's job-array script for
# the demo campaign with 4 shards, waits, merges, and checks that the merged
# outputs equal a single run (frames.csv byte for byte, every other table
# to rounding: 1e-10 relative, or 1e-6 of the standard uncertainty for
# fitted and debiased numbers; accumulators merge in another grouping than
# one run's).
#
# Usage: .ci/slurm.sh [CURLEW_BINARY]   (default: the debug binary that
# `cargo test` built, else a release build). Needs root (packages, daemons). Exit 0: proven;
# exit 1: the proof failed; exit 3: Slurm could not be started here (the
# reason is printed; CI reports it loudly instead of passing silently).
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$PWD
BIN=${1:-${CARGO_TARGET_DIR:-$ROOT/target}/debug/curlew}
WORK=$(mktemp -d /tmp/curlew-slurm.XXXXXX)
SPOOL=$WORK/spool
cant() { echo "slurm: CANNOT RUN HERE: $*" >&2; exit 3; }
fail() { echo "slurm: FAILED: $*" >&2; exit 1; }

if [ ! -x "$BIN" ]; then
  cargo build --release --quiet
  BIN=$ROOT/target/release/curlew
fi
if ! command -v slurmctld >/dev/null || ! command -v munged >/dev/null; then
  [ "$(id -u)" = 0 ] || cant "slurm-wlm and munge are not installed and this is not root"
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >/dev/null || cant "apt-get update failed"
  apt-get install -y -qq --no-install-recommends slurm-wlm munge >/dev/null \
    || cant "apt-get install slurm-wlm munge failed"
fi

echo "== munge"
mkdir -p /etc/munge /var/lib/munge /var/log/munge /run/munge
if [ ! -s /etc/munge/munge.key ]; then
  dd if=/dev/urandom of=/etc/munge/munge.key bs=1024 count=1 status=none
fi
chown -R munge:munge /etc/munge /var/lib/munge /var/log/munge /run/munge 2>/dev/null || true
chmod 0700 /etc/munge /var/lib/munge /var/log/munge; chmod 0400 /etc/munge/munge.key
chmod 0755 /run/munge
pgrep -x munged >/dev/null || runuser -u munge -- munged --force || munged --force \
  || cant "munged does not start"
munge -n | unmunge >/dev/null || cant "munge cannot encode and decode a credential"

echo "== slurm (one node: $(hostname -s))"
HOST=$(hostname -s)
CPUS=$(nproc)
MEM=$(awk '/MemTotal/ {print int($2 / 1024 / 2)}' /proc/meminfo)
# Daemons of an earlier run of this script are stopped first (their pid
# files live outside the work folder, which a successful run removes).
PIDS=/run/curlew-ci-slurm
mkdir -p "$PIDS" "$SPOOL/ctld" "$SPOOL/d" /etc/slurm
stop_daemons() {
  for d in slurmd slurmctld; do
    [ -f "$PIDS/$d.pid" ] && kill "$(cat "$PIDS/$d.pid")" 2>/dev/null || true
    rm -f "$PIDS/$d.pid"
  done
  sleep 1
}
stop_daemons
cat > /etc/slurm/slurm.conf <<CONF
ClusterName=curlew-ci
SlurmctldHost=$HOST
AuthType=auth/munge
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
SlurmUser=root
SlurmdUser=root
StateSaveLocation=$SPOOL/ctld
SlurmdSpoolDir=$SPOOL/d
SlurmctldPidFile=$PIDS/slurmctld.pid
SlurmdPidFile=$PIDS/slurmd.pid
SlurmctldLogFile=$WORK/slurmctld.log
SlurmdLogFile=$WORK/slurmd.log
JobCompType=jobcomp/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
NodeName=$HOST CPUs=$CPUS RealMemory=$MEM State=UNKNOWN
PartitionName=ci Nodes=$HOST Default=YES MaxTime=INFINITE State=UP
CONF
slurmctld -i || cant "slurmctld does not start: $(tail -5 $WORK/slurmctld.log 2>/dev/null)"
slurmd || cant "slurmd does not start: $(tail -5 $WORK/slurmd.log 2>/dev/null)"
cleanup() {
  scancel --quiet --user=root 2>/dev/null || true
  stop_daemons
}
trap cleanup EXIT
for _ in $(seq 60); do
  sinfo -h -o %T 2>/dev/null | grep -qE '^idle' && break
  scontrol update nodename="$HOST" state=resume 2>/dev/null || true
  sleep 1
done
sinfo -h -o %T | grep -qE '^idle' || cant "the node never became idle: $(sinfo 2>&1 | tail -2); $(tail -5 $WORK/slurmd.log)"

echo "== the README's job array, 4 shards of the demo"
cd "$WORK"
mkdir -p parts
# The README's script (section 'Campaigns that outgrow one machine'), with
# the array size, the resources of this one node and the paths filled in.
cat > reduce.sbatch <<JOB
#!/bin/bash
#SBATCH --job-name=curlew-reduce
#SBATCH --array=1-4
#SBATCH --cpus-per-task=1
#SBATCH --mem=400M
#SBATCH --output=$WORK/task-%a.log
$BIN run $ROOT/pipelines/demo.toml --shard slurm --out parts/\$SLURM_ARRAY_TASK_ID --jobs \$SLURM_CPUS_PER_TASK --quiet
JOB
JOBID=$(sbatch --parsable --chdir="$WORK" reduce.sbatch) || cant "sbatch refused the job"
echo "submitted array job $JOBID"
for _ in $(seq 1800); do
  left=$(squeue -h -j "$JOBID" 2>/dev/null | wc -l)
  [ "$left" = 0 ] && break
  sleep 1
done
[ "$(squeue -h -j "$JOBID" | wc -l)" = 0 ] || fail "the array did not finish within 30 minutes"
for k in 1 2 3 4; do
  [ -f "parts/$k/partial.json" ] || fail "task $k wrote no partial: $(cat task-$k.log 2>/dev/null)"
done

echo "== merge and compare with a single run"
"$BIN" merge parts/* --out merged --quiet
"$BIN" run "$ROOT/pipelines/demo.toml" --out single --quiet
# frames.csv byte for byte; every other table to rounding (the shards'
# accumulators merge in another grouping than one run's).
n=0
for f in $(cd single && find . -name 'frames.csv' | sort); do
  cmp -s "single/$f" "merged/$f" || fail "$f differs between the merge and a single run"
  n=$((n + 1))
done
[ "$n" -gt 0 ] || fail "no frames.csv to compare"
python3 - single merged <<'PY' || fail "the merged tables differ from a single run beyond rounding"
# Equal to rounding. The shards' accumulators add in another grouping than
# one run's, so the inputs of every derived number differ in the last bits.
# Plain numbers: 1e-12 + 1e-10 |value|. Rounding is amplified where a
# number comes from an ill-conditioned solve (the Lamb-Oseen fit: measured
# up to 8e-10 relative on the demo) or from a debiased difference of
# squares (the *_bias columns); the same conditioning amplifies the noise
# into that number's uncertainty, so there a difference passes when it is
# at most 1e-6 of the number's standard uncertainty (its `_unc` column in
# the same row), and an uncertainty, bias or chi-square itself to 1e-6 of
# its value.
import csv, pathlib, sys
a, b = map(pathlib.Path, sys.argv[1:3])
worst, files, by_unc = 0.0, 0, 0
for fa in sorted(a.rglob("*.csv")):
    fb = b / fa.relative_to(a)
    ra, rb = list(csv.reader(open(fa))), list(csv.reader(open(fb)))
    assert len(ra) == len(rb), f"{fa}: {len(ra)} vs {len(rb)} rows"
    head = ra[0]
    col = {name: k for k, name in enumerate(head)}
    for x, y in zip(ra, rb):
        assert len(x) == len(y), f"{fa}: row lengths differ"
        for k, (p, q) in enumerate(zip(x, y)):
            if p == q:
                continue
            try:
                u, v = float(p), float(q)
            except ValueError:
                raise AssertionError(f"{fa}: {head[k]}: {p!r} vs {q!r}")
            d = abs(u - v)
            if d <= 1e-12 + 1e-10 * abs(v):
                worst = max(worst, d / (1e-12 + 1e-10 * abs(v)))
                continue
            name = head[k]
            # fit_x, fit_y have no column of their own: the core's x_unc, y_unc.
            unc = col.get(name + "_unc", col.get(name.removeprefix("fit_") + "_unc"))
            if unc is not None and x[unc] not in ("", "NaN"):
                scale = abs(float(x[unc]))
            elif name.endswith("_unc") or "_bias" in name or "chi2" in name:
                scale = abs(v)
            else:
                scale = 0.0
            assert d <= 1e-6 * scale, f"{fa}: {name}: {p} vs {q}"
            by_unc += 1
    files += 1
print(f"slurm: {files} CSV tables agree; the largest plain difference is {worst:.3f} of the tolerance "
      f"1e-12 + 1e-10 |value|; {by_unc} fitted or debiased values agree to 1e-6 of their uncertainty")
PY
echo "slurm: ok: 4 array tasks on a one-node Slurm cluster merged into outputs equal to a single run (frames.csv byte for byte, statistics to rounding)"
rm -rf "$WORK"
