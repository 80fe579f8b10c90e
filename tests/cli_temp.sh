#!/usr/bin/env bash
# cli_temp.sh: the circuit's temperature on the command line: --temp gives exactly
# what a file's `temp:` gives (poles JSON and a Monte Carlo's JSON byte for byte),
# `check` names a temperature other than 27 C, a Monte Carlo continued with
# --resume keeps its --temp, and a temperature at or below absolute zero or a
# tempco that would take a value to zero is refused with exit 1 and a message.
# Reference: the file's own `temp:` key (the same temperature reached two ways).
# Usage: cli_temp.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
cd "$tmp"
cat >diode.yaml <<'YAML'
title: diode-biased tank (test circuit)
parts:
  I1: {type: current, nodes: [gnd, a], wave: dc, value: 1m}
  D1: {type: diode, nodes: [a, gnd], is: 1e-14, n: 1.2}
  R1: {type: resistor, nodes: [a, t], value: 2k, tempco: 300ppm, tol: 5%}
  L1: {type: inductor, nodes: [t, gnd], value: 10mH}
  C1: {type: capacitor, nodes: [t, gnd], value: 100n, tempco: -200ppm}
  G1: {type: poly-conductance, nodes: [t, gnd], coeffs: [0, -1m, 0, 0.3m]}
run: {stop: 20m, kick: {preset: {t: 0.1}}, accuracy: draft}
measure: {probe: t}
YAML
{ echo "temp: 85C"; cat diode.yaml; } >hot.yaml

"$ru" poles diode.yaml --temp 85 --json >a.json 2>err
check "poles --temp" 0 $?
"$ru" poles hot.yaml --json >b.json 2>err
check "poles of temp: 85C" 0 $?
cmp -s a.json b.json
check "--temp 85 = temp: 85C (poles JSON)" 0 $?
"$ru" poles diode.yaml --json >c.json 2>err
cmp -s a.json c.json
check "85 C moves the poles" 1 $?

"$ru" check hot.yaml >chk.txt 2>err
grepcheck "check names the temperature" "^temperature: 85 C" chk.txt
"$ru" check diode.yaml >chk27.txt 2>err
grep -q "^temperature:" chk27.txt
check "no temperature line at 27 C" 1 $?

"$ru" montecarlo diode.yaml --samples 4 --temp 85 --json >mc1.json 2>err
check "montecarlo --temp" 0 $?
"$ru" montecarlo hot.yaml --samples 4 --json >mc2.json 2>err
cmp -s mc1.json mc2.json
check "montecarlo --temp 85 = temp: 85C (JSON)" 0 $?
"$ru" montecarlo diode.yaml --samples 4 --temp 85 --shard 1/1 --out st >/dev/null 2>err
grepcheck "the study log keeps --temp" '"--temp=85"' st/units.jsonl

"$ru" poles diode.yaml --temp -300 >out 2>err
check "--temp -300 refused" 1 $?
grepcheck "absolute zero" "not above absolute zero" err
"$ru" poles diode.yaml --temp 6000C >out 2>err
check "--temp past the tempco refused" 1 $?
grepcheck "tempco message" "part C1: tempco -200 ppm/K at 6000 C would take its value to 0" err
"$ru" run diode.yaml --temp hot >out 2>err
check "--temp hot refused" 1 $?
finish
