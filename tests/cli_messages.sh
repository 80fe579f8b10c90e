#!/usr/bin/env bash
# cli_messages.sh: what a designer is told about a file or an option that is odd
# but not broken, and about one that cannot work: an inverting op-amp stage with
# its non-inverting input on ground is accepted (and has the textbook gain), a
# response of a node to itself and a sample spacing that cannot show the tone are
# refused with the reason, and a file without a probe says which node is measured.
# Usage: cli_messages.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"

cat >"$tmp/inv.yaml" <<'YAML'
title: inverting stage, gain -10
parts:
  VP: {type: supply, nodes: [vp, gnd], value: 12V}
  VN: {type: supply, nodes: [vn, gnd], value: -12V}
  RI: {type: resistor, nodes: [a, inm], value: 10k}
  RF: {type: resistor, nodes: [inm, o], value: 100k}
  RA: {type: resistor, nodes: [a, gnd], value: 1k}
  U1: {type: amplifier, in: gnd, inv: inm, out: o, law: opamp, gain: 100k, gbw: 1MHz}
YAML
"$ru" check "$tmp/inv.yaml" >"$tmp/out" 2>"$tmp/err"
check "op-amp with in: gnd accepted" 0 $?
if [ -x /usr/bin/python3 ]; then
    "$ru" response "$tmp/inv.yaml" --from a --to o --fmin 1 --fmax 10 --points 3 --json \
        >"$tmp/j" 2>"$tmp/err"
    check "inverting stage response" 0 $?
    # Reference: the inverting amplifier, v(o)/v(a) = -(RF/RI) / (1 + (1 + RF/RI)/A0)
    # at frequencies far below the loop's bandwidth (Sedra & Smith, "Microelectronic
    # Circuits", ch. 2; from memory): 10 / (1 + 11e-5) = 9.99890, phase 180 degrees.
    ok=$(/usr/bin/python3 -c '
import json, sys
p = json.load(open(sys.argv[1]))["points"][0]
want = 10 / (1 + 11e-5)
print(1 if abs(p["mag"] / want - 1) < 1e-4 and abs(abs(p["phase_deg"]) - 180) < 0.1 else 0)
' "$tmp/j")
    check "gain -RF/RI with finite A0" 1 "$ok"
fi
printf 'parts:\n  U1: {type: amplifier, in: gnd, out: o, law: follower-tanh}\n  R1: {type: resistor, nodes: [o, gnd], value: 1k}\n' >"$tmp/noinv.yaml"
"$ru" check "$tmp/noinv.yaml" >"$tmp/out" 2>"$tmp/err"
check "in on ref without inv refused" 1 $?
grepcheck "in/ref message" "noinv.yaml:2:3: .*in must differ from ref when no inv is given" "$tmp/err"

"$ru" response "$vdp" --from tank --to tank >"$tmp/out" 2>"$tmp/err"
check "response of a node to itself refused" 1 $?
grepcheck "same-node message" "--from and --to are the same node \(tank\)" "$tmp/err"

# 200 us against a 199 us period: one sample per period cannot show the tone.
"$ru" run "$vdp" --sample 200u >"$tmp/out" 2>"$tmp/err"
check "one sample per period refused" 1 $?
grepcheck "sampling message" "gives 1 samples per period of the predicted 5017 Hz tone" "$tmp/err"

# No measure section: the probe is an amplifier's output, and the run says so.
"$ru" run "$tmp/inv.yaml" --stop 2m >"$tmp/out" 2>"$tmp/err"
check "run without a probe" 0 $?
grepcheck "probe note" "no probe named in the file .*measuring v\(o\), the output of amplifier U1" "$tmp/out"

# Tables fit their columns to the longest value: every cell starts under its
# header, whatever the lengths (here a growth rate in e-notation).
"$ru" compare "$src/examples/follower-colpitts.yaml" --part A1 \
    --models soft-follower,emitter-follower >"$tmp/cmp" 2>"$tmp/err"
check "compare" 0 $?
if [ -x /usr/bin/python3 ]; then
    ok=$(/usr/bin/python3 -c '
import re, sys
lines = open(sys.argv[1]).read().split("\n")
h = next(i for i, l in enumerate(lines) if l.startswith("  model "))
starts = [m.start() for m in re.finditer(r"(?<=  )\S", "  " + lines[h][2:])]
rows = [l for l in lines[h + 1:h + 3]]
good = all(all(r[s - 1] == " " and r[s] != " " for s in starts) for r in rows)
print(1 if good and len(starts) == 11 else 0)
' "$tmp/cmp")
    check "compare columns aligned under their headers" 1 "$ok"
fi

finish
