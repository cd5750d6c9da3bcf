#!/bin/bash
# tests/cluster/slurm.sh - the job-array recipe of docs/cluster.md on a real one-node Slurm.
#
# Installs Debian's slurm-wlm daemons and munge if absent (needs root, as in CI), starts munged,
# slurmctld -D and slurmd -D in the background with every file (config, key, sockets, state,
# spool, logs, pid files) under one temporary directory, and then, with the job scripts taken
# unchanged from docs/cluster.md:
#   1. runs the array and its afterany merge job; cancels one task mid-run; checks that the
#      merge job refused (exit code 3 of `seedline status`, nothing merged), resubmits that one
#      index, checks it resumed, merges, and compares null.tsv and null.json byte for byte with
#      an unsharded run;
#   2. lets one task hit its --time limit: checks it was not requeued despite --requeue, that
#      only complete chunks are left, and that a resubmission keeps them and continues; then
#      requeues that resubmission (as pre-emption would) and checks it resumes again;
#   3. runs the xargs alternative of the same doc and compares it too.
# On exit (success, failure or signal) it cancels the jobs and stops exactly the daemons it
# started, by pid, then checks that no process carrying its tag is left, and removes the
# directory (kept with SEEDLINE_SLURM_KEEP=1).
#
# Sizes (environment): SEEDLINE_SLURM_REPLICATES (1200), SEEDLINE_SLURM_SHARDS (4),
# SEEDLINE_SLURM_CHUNK (20). The binary: SEEDLINE_BIN, else target/debug/seedline or
# target/release/seedline (whichever is newer), else `cargo build --locked`.
set -euo pipefail
{ # read whole before running: an edit of this file during a run cannot change the run

ROOT=$(cd "$(dirname "$0")/../.." && pwd)
DOC=$ROOT/docs/cluster.md
REPLICATES=${SEEDLINE_SLURM_REPLICATES:-1200}
K=${SEEDLINE_SLURM_SHARDS:-4}
CHUNK=${SEEDLINE_SLURM_CHUNK:-20}
PKGS=(munge slurmctld slurmd slurm-client)
T0=$(date +%s)
log() { printf '[slurm.sh %4ss] %s\n' "$(($(date +%s) - T0))" "$*"; }
die() {
  log "FAILED: $*"
  exit 1
}
[ "$(id -u)" = 0 ] || die "run as root (installs packages and starts munged as the munge user)"
((K >= 2)) || die "SEEDLINE_SLURM_SHARDS must be at least 2 (one shard is cancelled)"

# ------------------------------------------------------------------ packages
missing=()
for p in "${PKGS[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || missing+=("$p")
done
if ((${#missing[@]})); then
  log "installing ${missing[*]}"
  apt-get update -qq
  # Without systemd, the maintainer scripts would start the packaged daemons through
  # /etc/init.d; policy-rc.d (Debian's mechanism) forbids that during the install.
  own_policy=0
  if [ ! -e /usr/sbin/policy-rc.d ]; then
    printf '#!/bin/sh\nexit 101\n' >/usr/sbin/policy-rc.d
    chmod 755 /usr/sbin/policy-rc.d
    own_policy=1
  fi
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}" >/tmp/seedline-slurm-apt.log 2>&1 ||
    {
      ((own_policy)) && rm -f /usr/sbin/policy-rc.d
      cat /tmp/seedline-slurm-apt.log
      die "apt-get install failed"
    }
  ((own_policy)) && rm -f /usr/sbin/policy-rc.d
  rm -f /tmp/seedline-slurm-apt.log
fi
log "packages: $(dpkg-query -W -f='${Package} ${Version}  ' "${PKGS[@]}")"

# ------------------------------------------------------------------ seedline on PATH
BIN=${SEEDLINE_BIN:-}
if [ -z "$BIN" ]; then
  BIN=$(ls -t "$ROOT"/target/debug/seedline "$ROOT"/target/release/seedline 2>/dev/null | head -1 || true)
fi
if [ -z "$BIN" ]; then
  log "building seedline"
  (cd "$ROOT" && cargo build --locked --quiet)
  BIN=$ROOT/target/debug/seedline
fi
[ -x "$BIN" ] || die "no seedline binary at $BIN"

# ------------------------------------------------------------------ the private cluster
BASE=$(mktemp -d "${TMPDIR:-/tmp}/seedline-slurm.XXXXXX")
chmod 755 "$BASE"
mkdir -p "$BASE"/{bin,etc,state,spool,log,run,work,tl,xargs,ref} "$BASE"/munge/{key,run,lib,log}
ln -s "$(readlink -f "$BIN")" "$BASE/bin/seedline"
export PATH=$BASE/bin:$PATH
# Every daemon, job and local run inherits this tag: that is how leftovers are found.
export SEEDLINE_SLURM_TAG=$BASE
export SLURM_CONF=$BASE/etc/slurm.conf
MUNGE_SOCKET=$BASE/munge/run/munge.socket.2
NODE=$(hostname -s)
OK=0
LOCAL= # process group of a local run in progress

# DIR CMD...: CMD in DIR, in a process group of its own, waited for so that a signal is
# handled at once (cleanup then stops that group).
in_group() {
  setsid bash -c 'cd "$0" && exec "$@"' "$@" &
  LOCAL=$!
  wait "$LOCAL"
}

alive() { [ -s "$BASE/run/$1.pid" ] && [ -d "/proc/$(cat "$BASE/run/$1.pid")" ]; }
tagged() { # pids of live processes whose environment carries our tag (not this scan's own)
  local me=$BASHPID e pid ppid found=()
  for e in /proc/[0-9]*/environ; do
    pid=${e#/proc/}
    pid=${pid%/environ}
    ppid=$(awk '{print $4}' "/proc/$pid/stat" 2>/dev/null) || continue
    [ "$pid" = "$me" ] || [ "$ppid" = "$me" ] || [ "$pid" = $$ ] && continue
    { tr '\0' '\n' <"$e"; } 2>/dev/null | grep -qxF "SEEDLINE_SLURM_TAG=$BASE" && found+=("$pid")
  done
  for pid in "${found[@]}"; do [ -d "/proc/$pid" ] && echo "$pid"; done
  return 0
}
cleanup() {
  local rc=$?
  set +e
  trap - EXIT INT TERM
  if [ -n "$LOCAL" ]; then
    kill -TERM -- "-$LOCAL" 2>/dev/null
    wait "$LOCAL" 2>/dev/null
  fi
  if alive slurmctld && scontrol ping 2>/dev/null | grep -q UP; then
    local jobs
    jobs=$(squeue -h -o %A | sort -u)
    if [ -n "$jobs" ]; then
      log "cancelling jobs $(echo $jobs)"
      scancel $jobs
      for _ in $(seq 60); do [ -z "$(squeue -h)" ] && break; sleep 0.5; done
    fi
  fi
  for d in slurmd slurmctld munged; do
    alive "$d" || continue
    local pid
    pid=$(cat "$BASE/run/$d.pid")
    kill -TERM "$pid"
    for _ in $(seq 100); do [ -d "/proc/$pid" ] || break; sleep 0.2; done
    [ -d "/proc/$pid" ] && kill -KILL "$pid"
    wait "$pid" 2>/dev/null
    log "stopped $d (pid $pid)"
  done
  sleep 0.5
  local left
  left=$(tagged)
  if [ -n "$left" ]; then
    log "WARNING: still running, stopping by pid: $(for p in $left; do printf '%s(%s) ' "$p" "$(cat /proc/$p/comm 2>/dev/null)"; done)"
    kill -KILL $left 2>/dev/null
    rc=1
  fi
  if ((rc != 0)) || ((OK == 0)); then
    for f in "$BASE"/log/*.log "$BASE"/log/*.out "$BASE"/work/slurm-*.out "$BASE"/tl/slurm-*.out; do
      [ -s "$f" ] && { echo "---- $f (last 15 lines)"; tail -15 "$f"; }
    done
  fi
  if [ "${SEEDLINE_SLURM_KEEP:-0}" = 1 ]; then log "kept $BASE"; else rm -rf "$BASE"; fi
  ((OK)) && ((rc == 0)) && log "passed in $(($(date +%s) - T0)) s; nothing left running"
  exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

# Ports: the usual pair unless taken (another cluster on this machine).
port_free() { ! (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
PORT=6817
while ! port_free "$PORT" || ! port_free $((PORT + 1)); do PORT=$((PORT + 2)); done

chown -R munge:munge "$BASE/munge"
chmod 755 "$BASE/munge" "$BASE/munge/run" # munged wants its socket folder world-executable
chmod 700 "$BASE/munge/key" "$BASE/munge/lib" "$BASE/munge/log"
dd if=/dev/urandom of="$BASE/munge/key/munge.key" bs=1024 count=1 status=none
chown munge:munge "$BASE/munge/key/munge.key"
chmod 400 "$BASE/munge/key/munge.key"

HW=$(/usr/sbin/slurmd -C | head -1 | sed 's/^NodeName=[^ ]* //; s/ UpTime=.*//')
CPUS=$(sed -n 's/.*CPUs=\([0-9]*\).*/\1/p' <<<"$HW")
cat >"$SLURM_CONF" <<EOF
ClusterName=seedlinetest
SlurmctldHost=$NODE(127.0.0.1)
SlurmUser=root
SlurmdUser=root
SlurmctldPort=$PORT
SlurmdPort=$((PORT + 1))
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$MUNGE_SOCKET
StateSaveLocation=$BASE/state
SlurmdSpoolDir=$BASE/spool
SlurmctldPidFile=$BASE/run/slurmctld.daemon.pid
SlurmdPidFile=$BASE/run/slurmd.daemon.pid
SlurmctldLogFile=$BASE/log/slurmctld.log
SlurmdLogFile=$BASE/log/slurmd.log
MailProg=/bin/true
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SwitchType=switch/none
MpiDefault=none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
ReturnToService=2
KillWait=5
MinJobAge=900
NodeName=$NODE NodeAddr=127.0.0.1 $HW State=UNKNOWN
PartitionName=test Nodes=$NODE Default=YES MaxTime=INFINITE State=UP
EOF

start() { # NAME USER CMD...: in the foreground of its own session, pid recorded
  local name=$1 user=$2
  shift 2
  if [ "$user" = root ]; then
    setsid "$@" </dev/null >>"$BASE/log/$name.out" 2>&1 &
  else
    setsid setpriv --reuid="$user" --regid="$user" --init-groups -- "$@" </dev/null >>"$BASE/log/$name.out" 2>&1 &
  fi
  echo $! >"$BASE/run/$name.pid"
}
wait_for() { # DESCRIPTION SECONDS CONDITION
  local t=$SECONDS
  until eval "$3"; do
    ((SECONDS - t < $2)) || die "timeout after $2 s: $1"
    sleep 0.3
  done
}
start munged munge /usr/sbin/munged -F --key-file="$BASE/munge/key/munge.key" --socket="$MUNGE_SOCKET" \
  --pid-file="$BASE/munge/run/munged.pid" --log-file="$BASE/munge/log/munged.log" \
  --seed-file="$BASE/munge/lib/munged.seed"
wait_for "munge credential round trip" 20 "munge -S '$MUNGE_SOCKET' -n 2>/dev/null | unmunge -S '$MUNGE_SOCKET' >/dev/null 2>&1"
start slurmctld root /usr/sbin/slurmctld -D -i -f "$SLURM_CONF"
wait_for "slurmctld answers" 30 "scontrol ping 2>/dev/null | grep -q 'is UP'"
start slurmd root /usr/sbin/slurmd -D -f "$SLURM_CONF"
wait_for "node $NODE idle" 40 '[ "$(sinfo -h -n "$NODE" -o %T 2>/dev/null)" = idle ]'
log "cluster up: $NODE, $CPUS CPUs, ports $PORT-$((PORT + 1)), files in $BASE"

# ------------------------------------------------------------------ the recipe, from the doc
block() { # MARKER: the fenced block after the HTML comment holding MARKER
  awk -v m="$1" 'index($0, m) && /^<!--/ { f = 1; next }
                 f == 1 && /^```/ { f = 2; next }
                 f == 2 && /^```/ { exit }
                 f == 2 { print }' "$DOC"
}
block "as null-job.sh" >"$BASE/null-job.sh"
block "as merge-job.sh" >"$BASE/merge-job.sh"
SUBMIT=$(block "adding --cpus-per-task")
XARGS=$(block "slurm.sh runs the next block -->")
for f in null-job.sh merge-job.sh; do
  grep -q '^seedline\|^  --\|seedline ' "$BASE/$f" || die "no $f block in $DOC"
  cp "$BASE/$f" "$BASE/work/"
  cp "$BASE/$f" "$BASE/tl/"
done
[ -n "$SUBMIT" ] && [ -n "$XARGS" ] || die "the submission or xargs block is missing from $DOC"
# An invented scenario: a sedge of one fen whose seeds wait 80 generations in the soil on
# average. A look-back beyond N/10 keeps `--engine auto` on the exact engine, about 100
# replicates per CPU second here: slow enough to cancel a task mid-run.
for d in work tl xargs ref; do
  cat >"$BASE/$d/H0.yaml" <<'EOF'
seed: 11
demes: [{name: fen, size: 600, dormancy: {law: geometric, mean: 80}}]
samples: [{deme: fen, count: 12}]
mutation: {rate: 2.0e-11, sites: 50000}
EOF
done
export REPLICATES CHUNK

state() { scontrol -o show job "$1" 2>/dev/null | grep -o 'JobState=[A-Z_]*' | head -1 | cut -d= -f2; }
field() { scontrol -o show job "$1" 2>/dev/null | grep -o "$2=[^ ]*" | head -1 | cut -d= -f2; }
ended() { [ -z "$(squeue -h -j "$1" 2>/dev/null)" ]; }
chunks() { ls "$1" 2>/dev/null | grep -c '^chunk_.*\.tsv$' || true; }

# The time-limit task first: it needs a minute or more (Slurm counts --time in minutes and
# checks limits about every 30 s), so it runs beside everything else. Effectively endless.
cd "$BASE/tl"
TL=$(sbatch --parsable --array=0 --time=1 --cpus-per-task=1 \
  --export=ALL,K=1,REPLICATES=1000000000,CHUNK=50 null-job.sh)
TL=${TL%%;*}
log "time-limit task submitted: ${TL}_0 (--time=1, --requeue)"

# 1. The array and its merge job, as in the doc (CPUs per task scaled to this node).
cd "$BASE/work"
out=$(sed -e "s/^K=[0-9]*/K=$K/" -e 's/sbatch /sbatch --cpus-per-task=1 /g' <<<"$SUBMIT"$'\n''echo "array=${job%%;*}"' | bash)
ARRAY=$(sed -n 's/^array=//p' <<<"$out")
MERGE=$(sed -n 's/^Submitted batch job //p' <<<"$out")
[ -n "$ARRAY" ] && [ -n "$MERGE" ] || die "the submission block printed: $out"
log "array $ARRAY (K=$K, $REPLICATES replicates, chunks of $CHUNK), merge job $MERGE (afterany)"

# Cancel task 1 once it has written its first chunk.
wait_for "shard 1 writing" 120 '[ "$(chunks null/shard_1)" -ge 1 ]'
scancel "${ARRAY}_1"
wait_for "task ${ARRAY}_1 ended" 30 "ended ${ARRAY}_1"
n1=$(chunks null/shard_1)
per_shard=$(((REPLICATES / K + CHUNK - 1) / CHUNK))
[ "$(state "${ARRAY}_1")" = CANCELLED ] || die "task 1 is $(state "${ARRAY}_1"), expected CANCELLED"
((n1 < per_shard)) || die "task 1 finished ($n1 chunks) before it was cancelled: raise SEEDLINE_SLURM_REPLICATES"
log "cancelled ${ARRAY}_1 mid-run: $n1 of $per_shard chunks"

# Meanwhile: the unsharded run to compare with, and the xargs alternative of the doc.
in_group "$BASE/ref" bash -c 'seedline null H0.yaml --quiet --replicates "$REPLICATES" --chunk "$CHUNK" \
  --threads 1 --out run >/dev/null && seedline merge run --out all >/dev/null' || die "the unsharded run failed"
log "unsharded run done"
in_group "$BASE/xargs" bash -euo pipefail -c "$XARGS" >"$BASE/xargs/xargs.log" 2>&1 || {
  cat "$BASE/xargs/xargs.log"
  die "the xargs block failed"
}
LOCAL=
cmp "$BASE/xargs/null/all/null.tsv" "$BASE/ref/all/null.tsv" || die "xargs: merged null.tsv differs from the unsharded run"
log "xargs alternative: 8 shards merged, null.tsv byte-identical to the unsharded run"

# The merge job runs once every task has ended, and refuses.
wait_for "merge job $MERGE ended" 240 "ended $MERGE"
[ "$(state "$MERGE")" = FAILED ] || die "merge job $MERGE is $(state "$MERGE"), expected FAILED"
[ "$(field "$MERGE" ExitCode)" = 3:0 ] || die "merge job exit code $(field "$MERGE" ExitCode), expected 3:0"
grep -q "resubmit index 1\b" "slurm-$MERGE.out" || die "the merge job's log does not name index 1: $(cat "slurm-$MERGE.out")"
[ ! -e null/all ] || die "null/all exists after a refused merge"
log "merge job refused (exit 3) and named: $(grep -o 'resubmit index [0-9,-]*' "slurm-$MERGE.out")"
set +e
seedline status null >status.txt
rc=$?
seedline merge null/shard_* --out null/all 2>merge.err
rc_merge=$?
set -e
((rc == 3)) || die "status exit code $rc, expected 3"
((rc_merge == 2)) || die "early merge exit code $rc_merge, expected 2"
grep -q '^shard 1/'"$K"' *partial' status.txt || die "status: $(cat status.txt)"

# Resubmit that one index, as the doc says; it resumes.
R1=$(sbatch --parsable --array=1 --cpus-per-task=1 --export=ALL,K="$K" null-job.sh)
R1=${R1%%;*}
wait_for "resubmitted task ${R1}_1" 180 "ended ${R1}_1"
[ "$(state "${R1}_1")" = COMPLETED ] || die "resubmitted task is $(state "${R1}_1")"
summary=$(grep 'chunks complete' "slurm-${R1}_1.out")
resumed=$(sed -n 's/.*(\([0-9]*\) resumed.*/\1/p' <<<"$summary")
((resumed >= n1)) || die "resubmitted task did not resume: $summary"
log "resubmitted ${R1}_1: $summary"
seedline status null >/dev/null || die "status is not 0 after the resubmission"
sbatch --wait --quiet merge-job.sh >/dev/null || die "merge job failed after the resubmission"
cmp null/all/null.tsv "$BASE/ref/all/null.tsv" || die "merged null.tsv differs from the unsharded run"
cmp null/all/null.json "$BASE/ref/all/null.json" || die "merged null.json differs from the unsharded run"
log "merged $K shards: null.tsv and null.json byte-identical to the unsharded run"

# 2. The time limit.
cd "$BASE/tl"
wait_for "${TL}_0 to reach its time limit" 300 '[ "$(state "${TL}_0")" = TIMEOUT ]'
sleep 3
[ "$(state "${TL}_0")" = TIMEOUT ] && [ "$(field "${TL}_0" Restarts)" = 0 ] && ended "$TL" ||
  die "the timed-out task was requeued: $(scontrol -o show job "${TL}_0")"
seedline status null >status.txt && die "status says complete after a time-out"
# (A kill between a chunk's rename and its line in chunks.tsv leaves it unlisted: redone, fine.)
grep 'damaged:' status.txt | grep -qv 'not in the chunk manifest' && die "a killed task left a damaged chunk: $(cat status.txt)"
n_tl=$(chunks null/shard_0)
((n_tl >= 1)) || die "the time-limited task wrote no chunk"
(cd null/shard_0 && md5sum chunk_*.tsv >"$BASE/tl/before.md5")
log "${TL}_0 hit its time limit, not requeued (--requeue does not cover TIMEOUT); $n_tl complete chunks left"
TL2=$(sbatch --parsable --array=0 --time=1 --cpus-per-task=1 \
  --export=ALL,K=1,REPLICATES=1000000000,CHUNK=50 null-job.sh)
TL2=${TL2%%;*}
wait_for "resubmitted ${TL2}_0 writing" 120 '[ "$(chunks null/shard_0)" -ge $((n_tl + 2)) ]'
log "resubmitted ${TL2}_0 resumed after the $n_tl chunks"
# A requeue (what pre-emption or a node failure does) restarts it, and it resumes again.
scontrol requeue "${TL2}_0"
wait_for "${TL2}_0 requeued" 60 '[ "$(state "${TL2}_0")" = PENDING ]'
n_rq=$(chunks null/shard_0)
(cd null/shard_0 && md5sum chunk_*.tsv >"$BASE/tl/requeue.md5")
# Slurm holds a requeued job about 2 minutes; release it, but not within the second of the
# requeue (a credential issued in the same second as the revocation is refused).
sleep 2
scontrol update JobId="${TL2}_0" StartTime=now
wait_for "requeued ${TL2}_0 writing" 120 '[ "$(chunks null/shard_0)" -ge $((n_rq + 2)) ] ||
  { ended "$TL2" && die "the requeued task ended without running again: $(scontrol -o show job "${TL2}_0")"; }'
[ "$(field "${TL2}_0" Restarts)" = 1 ] || die "requeue: $(scontrol -o show job "${TL2}_0")"
log "requeued ${TL2}_0 restarted and resumed after $n_rq chunks"
scancel "${TL2}_0"
wait_for "${TL2}_0 ended" 30 "ended ${TL2}_0"
(cd null/shard_0 && md5sum --quiet -c "$BASE/tl/before.md5" "$BASE/tl/requeue.md5") ||
  die "the resubmission or the requeue rewrote chunks it should have kept"
seedline status null >status.txt || true
grep 'damaged:' status.txt | grep -qv 'not in the chunk manifest' && die "damaged chunk after the resubmission: $(cat status.txt)"
log "chunks kept unchanged through time-out, resubmission and requeue; $(chunks null/shard_0) complete, none damaged"

OK=1
exit 0
}
