#!/usr/bin/env bash
# cli_study.sh: batch studies on the command line: shards merged give exactly the
# report and JSON of one run (byte for byte; sweep JSON with its wall-clock times
# left out), a run stopped by SIGINT prints the report of the units done, exits
# 130 and goes on with --resume to exactly the one-run report (a record cut short
# on disk is dropped), the unit log holds whole lines, refusals (bad --shard,
# --shard without --out, a study continued by another command, a changed circuit
# file, shards missing or given twice, a folder used twice) with exit 1 and a
# message, a study whose every unit fails exits 2, the progress bar shows on a
# terminal only (not with --json, not into a pipe), and a two-key sweep grid
# against the LC tank's 1/(2 pi sqrt(LC)) and the poles' a/(2C).
# References: one run of the same study (the records carry doubles with 17
# digits, IEEE 754 round trip); the LC tank frequency 1/(2 pi sqrt(LC)) (the van
# der Pol tone sits within 1 % of it at eps < 0.2, Lindstedt-Poincare); the growth
# rate sigma = a/(2C) of a tank with net negative conductance a (hand analysis).
# Usage: cli_study.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3
wien=$src/examples/wien-lamp.yaml     # about 0.4 s a unit: slow enough to stop
colp=$src/examples/follower-colpitts.yaml
cd "$tmp"
# a van der Pol tank with tolerances: units of a few milliseconds
sed 's/value: 10mH}/value: 10mH, tol: 5%}/' "$vdp" >tank.yaml

# --- Monte Carlo: three shards merged = one run (text and JSON) ---
"$ru" montecarlo "$colp" --samples 7 --accuracy draft --json >one.json 2>err
check "montecarlo one run" 0 $?
"$ru" montecarlo "$colp" --samples 7 --accuracy draft >one.txt 2>err
for k in 1 2 3; do
    "$ru" montecarlo "$colp" --samples 7 --accuracy draft --shard $k/3 --out sh$k \
        >shard$k.txt 2>err
    check "shard $k/3" 0 $?
done
grepcheck "shard summary" "shard 2 of 3: 2 of its 2 units done" shard2.txt
"$ru" merge sh1 sh3 sh2/units.jsonl --json >merged.json 2>err
check "merge json" 0 $?
cmp -s one.json merged.json
check "merged JSON equals one run's, byte for byte" 0 $?
"$ru" merge sh2 sh1 sh3 >merged.txt 2>err
cmp -s one.txt merged.txt
check "merged table equals one run's, byte for byte" 0 $?
lines=$(wc -l <sh1/units.jsonl)
check "shard 1 log: header and units 0, 3, 6" 4 "$lines"

# merge refusals
"$ru" merge sh1 sh2 >out 2>err
check "merge with a shard missing" 1 $?
grepcheck "missing units named" "2 of the 7 units are in none of the files: 2 5" err
"$ru" merge sh1 sh2 sh3 sh1 >out 2>err
check "merge with a shard twice" 1 $?
grepcheck "twice message" "also in" err
"$ru" montecarlo "$colp" --samples 7 --seed 2 --accuracy draft --shard 3/3 --out other \
    >/dev/null 2>err
"$ru" merge sh1 sh2 other >out 2>err
check "merge of two studies" 1 $?
grepcheck "other study message" "belongs to another study" err

# --shard refusals; a folder is never overwritten
for bad in 0/3 4/3 x 3 1/0; do
    "$ru" montecarlo "$colp" --samples 7 --shard $bad --out bad >out 2>err
    check "--shard $bad refused" 1 $?
done
grepcheck "--shard message" "wants K/N" err
"$ru" montecarlo "$colp" --samples 7 --shard 1/2 >out 2>err
check "--shard without --out" 1 $?
grepcheck "--shard needs --out" "needs --out DIR" err
"$ru" montecarlo "$colp" --samples 7 --shard 1/3 --out sh1 >out 2>err
check "a used folder is refused" 3 $?
grepcheck "used folder message" "exists already: continue that study with --resume" err

# --- stopped by SIGINT, continued with --resume ---
"$ru" montecarlo "$wien" --samples 6 --threads 1 --out run >stopped.txt 2>stopped.err &
pid=$!
for _ in $(seq 1 600); do # until the first unit's record is in (at most 60 s)
    [ -f run/units.jsonl ] && [ "$(wc -l <run/units.jsonl)" -ge 2 ] && break
    sleep 0.1
done
kill -INT $pid
wait $pid
check "stopped run exits 128 + SIGINT" 130 $?
grepcheck "stop message" "stopped by SIGINT .* Continue with: ringup montecarlo --resume run" \
    stopped.err
grepcheck "report of the units done" "Monte Carlo: [1-5] of 6 units done" stopped.txt
done_lines=$(($(wc -l <run/units.jsonl) - 1))
grepcheck "report counts what the log holds" "Monte Carlo: $done_lines of 6 units done" \
    stopped.txt
printf '{"unit":5,"status":"o' >>run/units.jsonl # a record cut short by a crash
"$ru" montecarlo --resume run --samples 7 >out 2>err
check "--resume with a study option refused" 1 $?
"$ru" sweep --resume run >out 2>err
check "--resume by another command refused" 1 $?
grepcheck "another command message" "holds a montecarlo study" err
"$ru" montecarlo --resume run --threads 2 >resumed.txt 2>err
check "resumed run" 0 $?
"$ru" montecarlo "$wien" --samples 6 >whole.txt 2>err
cmp -s whole.txt resumed.txt
check "resumed report equals one run's, byte for byte" 0 $?
lines=$(wc -l <run/units.jsonl)
check "log: header and 6 whole records" 7 "$lines"
tail -c 1 run/units.jsonl | od -c | grep -q '\\n'
check "log ends with a whole line" 0 $?
units=$(tail -n +2 run/units.jsonl | sed 's/^{"unit":\([0-9]*\),.*/\1/' | sort -n | tr '\n' ' ')
check "every unit once in the log" "0 1 2 3 4 5 " "$units"
cp tank.yaml changed.yaml
"$ru" montecarlo changed.yaml --samples 3 --out chg >/dev/null 2>err
printf '# changed\n' >>changed.yaml
"$ru" montecarlo --resume chg >out 2>err
check "a changed circuit file is refused on resume" 1 $?
grepcheck "changed file message" "has changed since the study" err

# --- every unit fails: exit 2 (L <= 0 is refused in every row) ---
"$ru" sweep "$vdp" --vary L1.value=-3m:-1m:3 >out 2>err
check "sweep whose every point fails" 2 $?

# --- the progress bar: on a terminal only ---
"$ru" montecarlo tank.yaml --samples 3 --accuracy draft >out 2>err
grep -q $'\r' err
check "no bar when stdout is not a terminal" 1 $?
if script -qec true /dev/null >/dev/null 2>&1; then
    script -qec "\"$ru\" montecarlo tank.yaml --samples 3 --accuracy draft" /dev/null >tty.out
    grepcheck "bar on a terminal" $'\r  [0-9]+/3 units \\[[#.]+\\] +[0-9]+%  ETA' tty.out
    script -qec "\"$ru\" montecarlo tank.yaml --samples 3 --accuracy draft --json" /dev/null \
        >tty.json
    grep -q 'units \[' tty.json
    check "no bar with --json on a terminal" 1 $?
fi

# --- sweep: a two-key grid; shards merged = one run ---
"$ru" sweep "$vdp" --vary L1.value=5m:20m:3 --vary C1.value=80n:120n:2 --accuracy draft \
    --json >grid.json 2>err
check "grid sweep" 0 $?
for k in 1 2; do
    "$ru" sweep "$vdp" --vary L1.value=5m:20m:3 --vary C1.value=80n:120n:2 --accuracy draft \
        --shard $k/2 --out g$k >/dev/null 2>err
done
"$ru" merge g1 g2 --json >gridm.json 2>err
check "grid merge" 0 $?
grep -v '"wall_s"' grid.json >a
grep -v '"wall_s"' gridm.json >b
cmp -s a b
check "merged grid JSON equals one run's (wall times aside)" 0 $?
ls -d g1/00-* g2/01-* >/dev/null 2>&1
check "each shard keeps its points' folders" 0 $?
"$ru" sweep "$vdp" --vary L1.value=5m:20m:3 --vary C1.value=80n:120n:2 --accuracy draft \
    >grid.txt 2>err
rows=$(grep -Ec '^  [0-9.]+ mH +[0-9.]+ nF +yes ' grid.txt)
check "grid table: 6 rows" 6 "$rows"
if [ -x $py ]; then
    $py - grid.json <<'PY'
import json, math, sys
d = json.load(open(sys.argv[1]))
assert [g["vary"] for g in d["grid"]] == ["L1.value", "C1.value"], d["grid"]
r = d["results"]
assert len(r) == 6 and d["units_done"] == 6
for i, x in enumerate(r):
    L, C = x["values"]
    assert (L, C) == ([5e-3, 12.5e-3, 20e-3][i // 2], [80e-9, 120e-9][i % 2]), (i, L, C)
    assert x["value"] == L
    f0 = 1 / (2 * math.pi * math.sqrt(L * C))
    assert abs(x["frequency_hz"] / f0 - 1) < 0.01, (L, C, x["frequency_hz"], f0)
    sigma = 0.5e-3 / (2 * C)  # a/(2C), a = 0.5 mS
    assert abs(x["predicted"]["growth_rate_per_s"] / sigma - 1) < 1e-3, (C, x["predicted"])
PY
    check "grid against 1/(2 pi sqrt(LC)) and a/(2C)" 0 $?
fi
finish
