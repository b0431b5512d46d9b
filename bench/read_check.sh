#!/usr/bin/env bash
# Side by side, in one run: what the read check of issue 16 costs on why, diff and export
# (the shape of bench/run.py rows 3-5: 1,000-fix commits, then 20 small ones).
# usage: bench/read_check.sh BASE_BIN NEW_BIN GENERATE_BIN ROWS RUNS
#   BASE_BIN: emend built before the change (git worktree add ../base COMMIT; cargo build --release)
#   NEW_BIN:  target/release/emend; GENERATE_BIN: target/release/examples/generate
# Prints each command's times in seconds for both binaries, alternating run by run.
set -euo pipefail
base=$1; new=$2; gen=$3; rows=$4; runs=$5
w=$(mktemp -d); cd "$w"
export EMEND_HOME=$w/home EMEND_NOW=2026-10-01T09:00:00Z
"$gen" --rows "$rows" > s.csv
$base init >/dev/null; $base id new --name Bench >/dev/null
$base ingest s.csv --table s >/dev/null
python3 - "$rows" <<'PY'
import random, sys
rows=int(sys.argv[1]); rng=random.Random(7)
ids=[]
with open('s.csv') as f:
    next(f)
    for line in f: ids.append(line.split(',',1)[0])
for k in range(3):
    with open(f'map{k}.csv','w') as m:
        m.write('from,to\n')
        for i in rng.sample(ids, 1000): m.write(f'{i},{i}-r{k}\n')
PY
for k in 0 1 2; do $base recode s sample_id --map map$k.csv --why bench >/dev/null; $base commit -m c$k >/dev/null; done
for k in $(seq 1 20); do
  $base set s $((k*37+2)) ph 7.$k --why r$k >/dev/null 2>&1 || true
  $base commit -m w$k >/dev/null 2>&1 || true
done
row=100
t() { local s=$(date +%s.%N); "$@" >/dev/null 2>&1; echo "$(date +%s.%N) - $s" | bc; }
declare -A acc
for i in $(seq 1 "$runs"); do
  for name in base new; do
    b=${!name}
    acc[$name,why]+="$(t $b why s "$row" ph) "
    acc[$name,diff]+="$(t $b diff s 2 3 --json) "
    acc[$name,export]+="$(t $b export s -o out.csv) "
  done
done
for m in why diff export; do
  for name in base new; do
    echo "$m $name ${acc[$name,$m]}"
  done
done
$new verify >/dev/null && echo "new binary verifies the store"
