#!/usr/bin/env bash
# cli_stray.sh: the stray-capacitance warning in `check` (stderr, and the JSON
# warnings) and in `run` (a note, text and JSON), naming the node; none for the
# examples' circuits nor for the same crystal as a crystal part.
# Reference: a motional arm L_m = 19.79 mH, C_m = 20 fF (8 MHz) closed by 17 pF
# resonates, by the crystal pulling formula f = f_s sqrt(1 + C_m/C_L) with the
# default 1 pF stray added to C_m on the motional node m and to C_L, at
# 1/(2 pi sqrt(L_m (1.02p * 18p / 19.02p))) = 1.1515 MHz, and at 3.2774 MHz with the
# strays at a tenth (C_m = 20.1 fF, C_L = 17.1 pF) (analytic; tests/test_stray.c
# has the closed form).
# Usage: cli_stray.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3

cat >"$tmp/arm.yaml" <<'YAML'
title: a motional arm built from parts
parts:
  LM: {type: inductor, nodes: [a, m], value: 19.79m}
  CM: {type: capacitor, nodes: [m, gnd], value: 20f}
  CL: {type: capacitor, nodes: [a, gnd], value: 17p}
  RA: {type: resistor, nodes: [a, gnd], value: 1G}
YAML
cat >"$tmp/xtal.yaml" <<'YAML'
title: the same arm as a crystal part
parts:
  X1: {type: crystal, nodes: [a, gnd], freq: 8MHz, esr: 30, cm: 20f, c0: 0}
  CL: {type: capacitor, nodes: [a, gnd], value: 17p}
  RA: {type: resistor, nodes: [a, gnd], value: 1G}
YAML

"$ru" check "$tmp/arm.yaml" >"$tmp/out" 2>"$tmp/err"
check "check status" 0 $?
grepcheck "check warns on stderr, at m's place" \
    "arm.yaml:3:35: warning: the stray capacitance moves the dominant poles by 185 % \(1\.1515 MHz with the strays as given, 3\.2774 MHz" "$tmp/err"
grepcheck "check names the node" "most of it at node m \(1\.00 pF" "$tmp/err"
check "no 'no warnings' line" 0 "$(grep -c 'no warnings' "$tmp/out")"

"$ru" check "$tmp/xtal.yaml" >"$tmp/out" 2>"$tmp/err"
check "crystal part check status" 0 $?
grepcheck "crystal part: no warnings" "^no warnings$" "$tmp/out"
check "crystal part: nothing on stderr" 0 "$(grep -c 'stray capacitance moves' "$tmp/err")"

for f in "$src"/examples/*.yaml; do
    "$ru" check "$f" >/dev/null 2>"$tmp/err"
    check "no stray warning for $(basename "$f")" 0 "$(grep -c 'stray capacitance moves' "$tmp/err")"
done

"$ru" run "$tmp/arm.yaml" --stop 2u >"$tmp/out" 2>"$tmp/err"
check "run status" 0 $?
grepcheck "run note" "^note: .*arm.yaml:3:35: warning: the stray capacitance moves .* node m" "$tmp/out"

"$ru" check "$tmp/arm.yaml" --json >"$tmp/cj" 2>/dev/null
"$ru" run "$tmp/arm.yaml" --stop 2u --json >"$tmp/rj" 2>/dev/null
if [ -x "$py" ]; then
    "$py" - "$tmp/cj" "$tmp/rj" <<'PY' >"$tmp/pyout" 2>&1
import json, sys
c = json.load(open(sys.argv[1]))
r = json.load(open(sys.argv[2]))
w = [x for x in c["warnings"] if "stray capacitance moves" in x]
assert len(w) == 1 and "node m" in w[0], c["warnings"]
n = [x for x in r["notes"] if "stray capacitance moves" in x]
assert len(n) == 1 and "node m" in n[0], r["notes"]
print("ok")
PY
    check "JSON warnings and notes" 0 $?
    grepcheck "python said ok" "^ok$" "$tmp/pyout"
fi
finish
