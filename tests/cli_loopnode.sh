#!/usr/bin/env bash
# cli_loopnode.sh: the loop gain broken at a node from the command line and from the
# file (`--loop-node`, `--loop-load`, `measure: {loop-node, loop-load}`) in `poles`
# and `run`: what is printed, the JSON keys, and the refusals with their exit
# statuses. The figures themselves are checked in tests/test_loopnode.c and
# tests/ref_loopnode.py; here the reference is only the Wien network's textbook
# 1/3 at 1/(2 pi R C) around an ideal buffer (R = 10k, C = 10n: 1591.55 Hz).
# Usage: cli_loopnode.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"

cat >"$tmp/wien.yaml" <<'YAML'
title: Wien network around a unity buffer
stray: 1e-18
parts:
  A1: {type: amplifier, in: p, out: o, law: follower-tanh, gain: 1, swing: 5V, rout: 1m}
  RS: {type: resistor,  nodes: [o, s], value: 10k}
  CS: {type: capacitor, nodes: [s, p], value: 10n}
  RP: {type: resistor,  nodes: [p, gnd], value: 10k}
  CP: {type: capacitor, nodes: [p, gnd], value: 10n}
run: {kick: {preset: {p: 1m}}, stop: 2m}
measure: {probe: o, loop-node: o, loop-load: RS}
YAML

"$ru" poles "$tmp/wien.yaml" >"$tmp/out" 2>"$tmp/err"
check "poles with the file's loop-node" 0 $?
grepcheck "names the break" "loop gain at node o \(load side: RS nodes; double injection\): phase 0 at 1\.5915[0-9]* kHz, \|L\| = 0\.33333" "$tmp/out"

"$ru" poles "$tmp/wien.yaml" --loop-node p --json >"$tmp/j" 2>"$tmp/err"
check "poles --loop-node p --json" 0 $?
grepcheck "JSON node" '"node": "p"' "$tmp/j"
grepcheck "JSON load side: the buffer's input" '"load_side": "A1 in"' "$tmp/j"
grepcheck "JSON method" '"method": "Middlebrook double injection"' "$tmp/j"
grepcheck "JSON gain 1/3" '"gain_at_crossover": 0\.33333' "$tmp/j"

"$ru" poles "$tmp/wien.yaml" --loop A1 >"$tmp/out" 2>"$tmp/err"
check "--loop PART over the file's loop-node" 0 $?
grepcheck "the amplifier's return ratio" "^loop gain of A1: phase 0" "$tmp/out"

"$ru" run "$tmp/wien.yaml" --json >"$tmp/j" 2>"$tmp/err"
check "run with the file's loop-node" 0 $?
grepcheck "run JSON node" '"node": "o"' "$tmp/j"
grepcheck "run JSON load side" '"load_side": "RS nodes"' "$tmp/j"

"$ru" poles "$tmp/wien.yaml" --loop A1 --loop-node p >"$tmp/out" 2>"$tmp/err"
check "--loop and --loop-node together" 1 $?
grepcheck "says not both" "not both" "$tmp/err"

"$ru" poles "$tmp/wien.yaml" --loop-load RS >"$tmp/out" 2>"$tmp/err"
check "--loop-load alone" 1 $?
grepcheck "asks for --loop-node" "give --loop-node too" "$tmp/err"

"$ru" poles "$tmp/wien.yaml" --loop-node pp >"$tmp/out" 2>"$tmp/err"
check "unknown node" 1 $?
grepcheck "closest node" "loop node pp does not exist \(did you mean p\?\)" "$tmp/err"

"$ru" run "$tmp/wien.yaml" --loop-node s >"$tmp/out" 2>"$tmp/err"
check "run: no input on the node" 1 $?
grepcheck "place and terminals" "wien.yaml:5:[0-9]+: loop node s: no control input sits on it.*terminals on it: RS nodes, CS nodes" "$tmp/err"

"$ru" poles "$tmp/wien.yaml" --loop-node s --loop-load CS,RS >"$tmp/out" 2>"$tmp/err"
check "every terminal on the load side" 1 $?
grepcheck "driver side empty" "driver side needs at least one" "$tmp/err"

finish
