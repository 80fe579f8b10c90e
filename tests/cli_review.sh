#!/usr/bin/env bash
# cli_review.sh: command-line behaviour found in a correctness review: odd run
# lengths and sample spacings, figures that are null with their reason in the
# notes, messages that say what is wrong.
# Usage: cli_review.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
export RINGUP_MODELS=${RINGUP_MODELS:-$src/models}

# A sample spacing not shorter than the run is bad input (exit 1) and the message
# names the file and both times, whether the spacing is given, written in the file
# or automatic (72 per period of the 5 kHz tone is 2.8 us, longer than 1 ns).
"$ru" run "$vdp" --stop 20m --sample 30m >"$tmp/out" 2>"$tmp/err"
check "sample longer than stop: status" 1 $?
grepcheck "sample longer than stop: message" "vdp-tank.yaml: .*sample spacing .*0.03 s.*stop 0.02 s" "$tmp/err"
"$ru" run "$vdp" --stop 1n >"$tmp/out" 2>"$tmp/err"
check "stop shorter than the auto spacing: status" 1 $?
grepcheck "stop shorter than the auto spacing: message" "vdp-tank.yaml: .*not shorter than the run" "$tmp/err"
printf 'parts:\n  L1: {type: inductor, nodes: [t, gnd], value: 10mH}\n  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\nrun: {stop: 1m, sample: 2m}\n' >"$tmp/s.yaml"
"$ru" run "$tmp/s.yaml" --json >"$tmp/out" 2>"$tmp/err"
check "file sample longer than stop: status" 1 $?
grepcheck "file sample longer than stop: message" "s.yaml: .*not shorter than the run" "$tmp/err"

# A figure that cannot be had is null and the notes say why (README, JSON keys).
# The tank at 7.5 mH rings at 1/(2 pi sqrt(7.5 mH * 100 nF)) = 5.81 kHz; a 5 ms run
# leaves 0.5 ms, under 3 periods, as the settled window: fewer than the 4 the THD
# needs. (Reference: LC resonance formula.)
sed 's/value: 10mH/value: 7.5mH/' "$vdp" >"$tmp/vdp75.yaml"
"$ru" run "$tmp/vdp75.yaml" --stop 5m --json >"$tmp/j75" 2>"$tmp/err"
check "short window: status" 0 $?
/usr/bin/python3 - "$tmp/j75" >"$tmp/out" 2>&1 <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
assert d["started"] and d["thd_percent"] is None, d
assert any("THD" in n and "whole periods" in n for n in d["notes"]), d["notes"]
print("ok")
PY
grepcheck "null THD has its reason in notes" "^ok$" "$tmp/out"
# Stopped long before the tank grows (100 us, half a period): not started, and the
# verdict is undecided (the poles say it grows, the run is far too short to tell),
# with the reason in the notes.
"$ru" run "$vdp" --stop 100u --json >"$tmp/j1" 2>"$tmp/err"
check "not started: status" 0 $?
/usr/bin/python3 - "$tmp/j1" >"$tmp/out" 2>&1 <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
assert not d["started"] and d["growth_rate_per_s"] is None, d
assert d["verdict"] == "undecided", d
assert any("run longer" in n for n in d["notes"]), d["notes"]
print("ok")
PY
grepcheck "not started has its reason in notes" "^ok$" "$tmp/out"

# At 20 mH (3.56 kHz) a 5 ms run has one cycle in its last 0.5 ms: the run is not
# called settled, and the note says there are too few cycles to tell, instead of
# "still moves 0 %".
sed 's/value: 10mH/value: 20mH/' "$vdp" >"$tmp/vdp20.yaml"
"$ru" run "$tmp/vdp20.yaml" --stop 5m --json >"$tmp/j20" 2>"$tmp/err"
check "one window cycle: status" 0 $?
/usr/bin/python3 - "$tmp/j20" >"$tmp/out" 2>&1 <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
assert d["started"] and not d["settled"], d
assert any("only one cycle" in n for n in d["notes"]), d["notes"]
assert not any("moves 0 %" in n for n in d["notes"]), d["notes"]
print("ok")
PY
grepcheck "one window cycle note" "^ok$" "$tmp/out"

# A spacing of 1 ms on the 5 kHz tank (period 1/(2 pi sqrt(10 mH * 100 nF)) = 0.199 ms,
# LC resonance) gives 0.2 samples per period: no cycle could be seen, so the run is
# refused up front with the figure (it would only say "did not start").
"$ru" run "$vdp" --stop 20m --sample 1m --json >"$tmp/js" 2>"$tmp/err"
check "undersampled: status" 1 $?
grepcheck "undersampled: refused from the predicted tone" \
    "gives 0.2 samples per period of the predicted 5017 Hz tone" "$tmp/err"

# A preset kick on a node a supply holds (here through two stacked supplies) is
# refused by `check` as well as `run`, at the preset's own place (line 6, col 40),
# naming the supply; it used to pass `check` and fail `run` at the node's first
# mention.
cat >"$tmp/kick.yaml" <<'YAML'
parts:
  V1: {type: supply, nodes: [v1, gnd], value: 5}
  V2: {type: supply, nodes: [v2, v1], value: 3}
  R1: {type: resistor, nodes: [v2, a], value: 100k}
  C1: {type: capacitor, nodes: [a, gnd], value: 100nF}
run: {stop: 10m, kick: {preset: {a: 1, v2: 2}}}
YAML
"$ru" check "$tmp/kick.yaml" >"$tmp/out" 2>"$tmp/err"
check "preset on a held node: check status" 1 $?
grepcheck "preset on a held node: place" "kick.yaml:6:40: run: kick preset: node v2 is held by supply V2" "$tmp/err"
sed -i 's/v2: 2/a: 1/; s/{a: 1, a: 1}/{a: 1}/' "$tmp/kick.yaml"
"$ru" check "$tmp/kick.yaml" >"$tmp/out" 2>"$tmp/err"
check "preset on a free node beside stacked supplies" 0 $?

# sweep and compare rows carry the run's notes in JSON, as their text tables do:
# at 7.5 mH a 5 ms run has too few periods for THD (see above), and the row says so.
"$ru" sweep "$vdp" --vary L1.value=7.5m:10m:2 --stop 5m --threads 1 --json >"$tmp/sw" 2>"$tmp/err"
check "sweep: status" 0 $?
/usr/bin/python3 - "$tmp/sw" >"$tmp/out" 2>&1 <<'PY'
import json, sys
d = json.load(open(sys.argv[1]))
r = d["results"][0]
assert r["thd_percent"] is None, r
assert any("THD" in n for n in r["notes"]), r
print("ok")
PY
grepcheck "sweep row notes in JSON" "^ok$" "$tmp/out"
"$ru" compare "$src/examples/follower-colpitts.yaml" --part A1 --models soft-follower \
    --stop 1m --threads 1 --json >"$tmp/cmp" 2>"$tmp/err"
check "compare: status" 0 $?
/usr/bin/python3 -c 'import json,sys; r=json.load(open(sys.argv[1]))["results"][0]; assert isinstance(r["notes"], list); print("ok")' "$tmp/cmp" >"$tmp/out" 2>&1
grepcheck "compare row has notes in JSON" "^ok$" "$tmp/out"

# A lone inductor with the 1 pF stray is a lossless tank: its poles sit on the jw
# axis (real part 0 exactly, zero trace), at 1/(2 pi sqrt(10 mH * 1 pF)) = 1.59 MHz
# (LC resonance). The verdict must not say "left of the jw axis".
printf 'parts:\n  L1: {type: inductor, nodes: [a, gnd], value: 10mH}\n' >"$tmp/ideal.yaml"
"$ru" poles "$tmp/ideal.yaml" >"$tmp/out" 2>"$tmp/err"
check "lossless tank poles: status" 0 $?
grepcheck "lossless tank: on the axis (poles)" "dominant pair: growth rate 0 /s at 1.59.. MHz: on the jw axis" "$tmp/out"
"$ru" run "$tmp/ideal.yaml" --stop 10u >"$tmp/out" 2>"$tmp/err"
check "lossless tank run: status" 0 $?
grepcheck "lossless tank: on the axis (run)" "started +no \(no-start\) +no \(poles on the jw axis\)" "$tmp/out"

finish
