#!/usr/bin/env bash
# cli_exit.sh: the command line's promises: exit statuses (0 done, 1 bad input,
# 2 numerical failure, 3 file I/O, 4 expectation not met), FILE:LINE:COL messages,
# JSON on stdout only, files written whole or not at all.
# Usage: cli_exit.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"

"$ru" --version >"$tmp/out" 2>&1
check "--version" 0 $?
"$ru" frobnicate >"$tmp/out" 2>&1
check "unknown command" 1 $?
"$ru" run "$vdp" --frobnicate >"$tmp/out" 2>&1
check "unknown option" 1 $?

# A bad value: the message names the file, line and column of the value.
printf 'parts:\n  C1: {type: capacitor, nodes: [a, gnd], value: 15nH}\n' >"$tmp/bad.yaml"
"$ru" check "$tmp/bad.yaml" >"$tmp/out" 2>"$tmp/err"
check "wrong unit" 1 $?
grepcheck "wrong unit place" "bad.yaml:2:[0-9]+: .*C1.*unit H" "$tmp/err"

# YAML syntax error.
printf 'parts:\n  C1: {type: capacitor, nodes: [a, gnd\n' >"$tmp/syntax.yaml"
"$ru" run "$tmp/syntax.yaml" >"$tmp/out" 2>"$tmp/err"
check "syntax error" 1 $?
grepcheck "syntax error place" "syntax.yaml:[0-9]+:[0-9]+:" "$tmp/err"

# A file that is not there is a file I/O error.
"$ru" run "$tmp/missing.yaml" >"$tmp/out" 2>"$tmp/err"
check "missing file" 3 $?

# An output folder that cannot be made: a plain file stands in its way.
touch "$tmp/plain"
"$ru" run "$vdp" --out "$tmp/plain/sub" >"$tmp/out" 2>"$tmp/err"
check "unwritable folder" 3 $?

# Done, with a whole CSV and no temporary file left behind.
"$ru" run "$vdp" --out "$tmp/o" >"$tmp/out" 2>"$tmp/err"
check "run" 0 $?
grepcheck "csv header" "^time_s,tank,i\(L1\)$" <(head -1 "$tmp/o/wave.csv")
left=$(ls "$tmp/o" | grep -vc '^wave.csv$')
check "no temporary file" 0 "$left"

# Expectations: met -> 0, missed -> 4 (van der Pol tank: 2 V, starts in ~3.4 ms).
"$ru" run "$vdp" --expect-start-within 10m --expect-amplitude 1.9V:2.1V \
    --expect-thd-below 5% >"$tmp/out" 2>"$tmp/err"
check "expectations met" 0 $?
"$ru" run "$vdp" --expect-start-within 1m >"$tmp/out" 2>"$tmp/err"
check "start too slow" 4 $?
grepcheck "start too slow message" "expectation not met: start-up within" "$tmp/err"
"$ru" run "$vdp" --expect-thd-below 0.1% >"$tmp/out" 2>"$tmp/err"
check "THD too high" 4 $?

# A numerical failure (a cubic that drives the tank to infinity): exit 2, the time
# reached, and the samples computed so far kept.
cat >"$tmp/blow.yaml" <<'YAML'
parts:
  L1: {type: inductor, nodes: [t, gnd], value: 1mH}
  C1: {type: capacitor, nodes: [t, gnd], value: 1u}
  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -1m, 0, -1m]}
run: {stop: 40m, kick: {preset: {t: 1}}}
YAML
"$ru" run "$tmp/blow.yaml" --out "$tmp/ob" >"$tmp/out" 2>"$tmp/err"
check "numerical failure" 2 $?
grepcheck "failure time" "solver failed at t = " "$tmp/err"
rows=$(wc -l <"$tmp/ob/wave.csv")
[ "$rows" -gt 10 ] && passes=$((passes + 1)) || { echo "FAIL: partial csv has $rows lines"; fails=$((fails + 1)); }

# Pictures: the files are written; a bad format or folder is refused before any
# simulation work (exit 1 / 3), and nothing half-written is left.
"$ru" run "$vdp" --plots "$tmp/pl" --report "$tmp/pl/report.pdf" >"$tmp/out" 2>"$tmp/err"
check "plots" 0 $?
for f in wave growth spectrum poles; do
    [ -s "$tmp/pl/$f.png" ] && passes=$((passes + 1)) || { echo "FAIL: no $f.png"; fails=$((fails + 1)); }
done
head -c 5 "$tmp/pl/report.pdf" | grep -q '%PDF-' && passes=$((passes + 1)) || { echo "FAIL: report is not a PDF"; fails=$((fails + 1)); }
"$ru" run "$vdp" --plots "$tmp/pl" --plot-format bmp >"$tmp/out" 2>"$tmp/err"
check "unknown plot format" 1 $?
"$ru" run "$vdp" --plots "$tmp/plain/sub" >"$tmp/out" 2>"$tmp/err"
check "unwritable plot folder" 3 $?
"$ru" run "$vdp" --report "$tmp/r.docx" >"$tmp/out" 2>"$tmp/err"
check "unknown report type" 1 $?
"$ru" response "$src/examples/follower-colpitts.yaml" --from tap --to top --plots "$tmp/pr" \
    --plot-format svg >"$tmp/out" 2>"$tmp/err"
check "response plot" 0 $?
grep -q '<svg' "$tmp/pr/response.svg" && passes=$((passes + 1)) || { echo "FAIL: response.svg"; fails=$((fails + 1)); }

# WAV: written whole at -12 dBFS with the caution on the terminal.
"$ru" run "$vdp" --wav "$tmp/v.wav" >"$tmp/out" 2>"$tmp/err"
check "wav" 0 $?
grepcheck "wav caution" "turn the volume down" "$tmp/out"
"$ru" run "$vdp" --wav "$tmp/v2.wav" --wav-level -0.5 >"$tmp/out" 2>"$tmp/err"
check "wav level above -1 dBFS" 1 $?
[ ! -e "$tmp/v2.wav" ] && passes=$((passes + 1)) || { echo "FAIL: refused wav exists"; fails=$((fails + 1)); }

# JSON: stdout holds one JSON document and nothing else.
if [ -x /usr/bin/python3 ]; then
    for cmd in "run $vdp" "poles $vdp" "check $vdp" \
               "response $src/examples/follower-colpitts.yaml --from tap --to top"; do
        "$ru" $cmd --json >"$tmp/j" 2>/dev/null
        check "json status: $cmd" 0 $?
        /usr/bin/python3 -c 'import json,sys; json.load(open(sys.argv[1]))' "$tmp/j"
        check "json parses: $cmd" 0 $?
    done
fi

# --verify reruns at 10x tighter tolerances and says how much each figure moved.
"$ru" run "$vdp" --verify >"$tmp/out" 2>"$tmp/err"
check "verify" 0 $?
grepcheck "verify table" "verify: rerun at 10x tighter tolerances" "$tmp/out"
"$ru" run "$vdp" --verify --json >"$tmp/vj" 2>"$tmp/err"
check "verify json" 0 $?
if [ -x /usr/bin/python3 ]; then
    /usr/bin/python3 -c 'import json,sys; v=json.load(open(sys.argv[1]))["verify"]; assert v["rtol"] < 1e-8 and abs(v["moved_percent"]["settled_amplitude_v"]) < 0.1, v' "$tmp/vj"
    check "verify json content" 0 $?
fi
# a refused plot option leaves no new output folder behind
"$ru" run "$vdp" --out "$tmp/newdir" --plots "$tmp/pl" --plot-format bmp >"$tmp/out" 2>"$tmp/err"
check "refused plot format" 1 $?
[ ! -e "$tmp/newdir" ] && passes=$((passes + 1)) || { echo "FAIL: output folder made before the refusal"; fails=$((fails + 1)); }

# compare: three models on the follower example in parallel, one row each; a model
# that does not exist is reported in its row and does not stop the others.
col=$src/examples/follower-colpitts.yaml
"$ru" compare "$col" --part A1 --models soft-follower,emitter-follower,nonesuch --json \
    >"$tmp/cmp.json" 2>"$tmp/err"
check "compare" 0 $?
if [ -x /usr/bin/python3 ]; then
    /usr/bin/python3 - "$tmp/cmp.json" <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
r = {x["model"]: x for x in d["results"]}
assert d["part"] == "A1", d
assert len(d["results"]) == 3, d
for m in ("soft-follower", "emitter-follower"):
    assert r[m]["started"] is True, r[m]
    assert r[m]["settled_amplitude_v"] > 0.5, r[m]
assert "error" in r["nonesuch"], r["nonesuch"]
# the emitter follower's wider swing (3 V against 1.5 V) settles higher
assert r["emitter-follower"]["settled_amplitude_v"] > r["soft-follower"]["settled_amplitude_v"]
PY
    check "compare json" 0 $?
    "$ru" compare "$col" --part A1 --models soft-follower,emitter-follower --stop 1m \
        --out "$tmp/cmpout" >"$tmp/out" 2>"$tmp/err"
    check "compare --out" 0 $?
    for m in soft-follower emitter-follower; do
        [ -s "$tmp/cmpout/$m/wave.csv" ] && passes=$((passes + 1)) || { echo "FAIL: no $m/wave.csv"; fails=$((fails + 1)); }
    done
    "$ru" models --json >"$tmp/m.json" 2>"$tmp/err"
    check "models" 0 $?
    /usr/bin/python3 -c 'import json,sys; m=json.load(open(sys.argv[1])); assert len(m) >= 10 and len({x["law"] for x in m}) >= 6 and all("name" in x and "params" in x for x in m)' "$tmp/m.json"
    check "models json: 10 presets over 6 laws" 0 $?
fi

finish
