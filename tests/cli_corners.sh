#!/usr/bin/env bash
# cli_corners.sh: `ringup corners` on the command line: the corners of an LC tank
# with toleranced L and C, the highest and lowest tone at the corners where both
# are low and both high, against Thomson's 1/(2 pi sqrt(LC)) at those values
# (within 0.5 %: the van der Pol tone at eps = 0.03 sits within eps^2/16 of it,
# Lindstedt-Poincare); every corner counted once (rule of product); shards merged
# give exactly one run's table and JSON (its wall-clock times left out); a
# corners: section with temp and supply; refusals with exit 1 and a message.
# Usage: cli_corners.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3
cd "$tmp"
cat >tank.yaml <<'YAML'
title: toleranced LC tank (test circuit)
parts:
  L1: {type: inductor, nodes: [t, gnd], value: 10mH, tol: 5%}
  C1: {type: capacitor, nodes: [t, gnd], value: 100n, tol: 10%}
  RP: {type: resistor, nodes: [t, gnd], value: 20k, tol: 2%}
  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -0.15m, 0, 0.05m]}
run: {stop: 60m, kick: {preset: {t: 10m}}, accuracy: draft}
measure: {probe: t}
YAML

"$ru" corners tank.yaml --json >one.json 2>err
check "corners --json" 0 $?
"$ru" corners tank.yaml >one.txt 2>err
check "corners" 0 $?
grepcheck "every corner starts" "starts at every corner: yes \(8 of 8 started\)" one.txt
"$py" - one.json <<'PY'
import json, math, sys
d = json.load(open(sys.argv[1]))
assert d["corners"] == 8 and len(d["results"]) == 9, "2 x 2 x 2 corners and the nominal"
seen = {tuple(r["levels"]) for r in d["results"] if r["unit"] > 0}
assert len(seen) == 8, "every combination once"
names = [f["name"] for f in d["factors"]]
assert names == ["L1", "C1", "RP"], names
for key, want in (("frequency_highest", -1), ("frequency_lowest", 1)):
    u = d["worst"][key]["unit"]
    lv = d["results"][u]["levels"]
    assert lv[0] == want * 0.05 and lv[1] == want * 0.10, (key, lv)
    L, C = 10e-3 * (1 + lv[0]), 100e-9 * (1 + lv[1])
    f0 = 1 / (2 * math.pi * math.sqrt(L * C))
    got = d["worst"][key]["value"]
    assert abs(got / f0 - 1) < 5e-3, (key, got, f0)
    print("%s: %.2f Hz, Thomson %.2f Hz" % (key, got, f0))
PY
check "worst tones against Thomson's formula" 0 $?

for k in 1 2; do
    "$ru" corners tank.yaml --shard $k/2 --out sh$k >/dev/null 2>err
    check "shard $k/2" 0 $?
done
"$ru" merge sh1 sh2 >merged.txt 2>err
check "merge" 0 $?
cmp -s one.txt merged.txt
check "merged table = one run" 0 $?
"$ru" merge sh2 sh1 --json >merged.json 2>err
grep -v '"wall_s"' one.json >a.json
grep -v '"wall_s"' merged.json >b.json
cmp -s a.json b.json
check "merged JSON = one run (wall times aside)" 0 $?

{ cat tank.yaml; printf 'corners:\n  temp: [-40C, 85C]\n  supply: [-10%%, 10%%]\n  L1: [low, high]\n'; } >sec.yaml
"$ru" corners sec.yaml >sec.txt 2>err
check "corners: section" 0 $?
grepcheck "section factors" "8 corners of 3 factors: temp \[-40 C, 85 C\]; supply \[-10 %, \+10 %\]; L1 \[-5 %, \+5 %\]" sec.txt

sed '/tol/s/, tol: [0-9]*%//' tank.yaml >notol.yaml
"$ru" corners notol.yaml >out 2>err
check "nothing to vary" 1 $?
grepcheck "nothing to vary message" "corners: nothing to vary" err
{ cat tank.yaml; printf 'corners:\n  X1: [low, high]\n'; } >bad.yaml
"$ru" corners bad.yaml >out 2>err
check "unknown part refused" 1 $?
grepcheck "FILE:LINE:COL" "bad.yaml:10:3: corners: X1: no part X1" err
finish
