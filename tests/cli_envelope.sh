#!/usr/bin/env bash
# cli_envelope.sh: run --engine: a bad name is refused (exit 1); auto picks the
# envelope engine for a start-up of thousands of cycles and says so; envelope.csv
# (one row per computed cycle) and wave.csv are written; the noise kick cannot be
# followed by envelope steps (exit 1, saying why); the default start (power-on
# with thermal noise) runs on the envelope engine; --engine direct is kept.
# Reference: a tank of Q 1e4 with a cubic conductance of margin 5 settles at 1 V
# (method of averaging: 2 sqrt(a/(3b)) with a = g1 - 1/R, b = 4a/3).
# Usage: cli_envelope.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3

q=$tmp/q1e4.yaml
cat >"$q" <<'YAML'
title: LC tank of Q 1e4 kept alive by a cubic conductance (test values)
parts:
  L1: {type: inductor, nodes: [tank, gnd], value: 10m}
  C1: {type: capacitor, nodes: [tank, gnd], value: 100n}
  R1: {type: resistor, nodes: [tank, gnd], value: 3.16227766M}
  G1: {type: poly-conductance, nodes: [tank, gnd], coeffs: [0, -1.58113883u, 0, 1.68654809u]}
run: {kick: {preset: {tank: 1m}}}
measure: {probe: tank}
YAML

"$ru" run "$vdp" --engine fast >"$tmp/out" 2>"$tmp/err"
check "bad engine" 1 $?
grepcheck "bad engine message" "auto, direct or envelope" "$tmp/err"

mkdir -p "$tmp/o"
"$ru" run "$q" --out "$tmp/o" >"$tmp/out" 2>"$tmp/err"
check "auto run" 0 $?
grepcheck "auto says why" "engine: envelope: the start-up spans about" "$tmp/out"
grepcheck "cycles line" "cycles integrated, .* spanned by" "$tmp/out"
grepcheck "settled at 1 V" "settled amplitude +(999\.[5-9]|1\.000) " "$tmp/out"
check "envelope.csv header" "time_s,amplitude_v,frequency_hz,dc_v,alone" "$(head -1 "$tmp/o/envelope.csv")"
check "wave.csv written" yes "$([ -s "$tmp/o/wave.csv" ] && echo yes || echo no)"

"$ru" run "$q" --json >"$tmp/json" 2>"$tmp/err"
check "auto json" 0 $?
if [ -x "$py" ]; then
    "$py" - "$tmp/json" <<'PY' >"$tmp/pyout" 2>&1
import json, sys
d = json.load(open(sys.argv[1]))
assert d["engine"] == "envelope", d["engine"]
e = d["envelope"]
assert e["cycles_spanned"] > 5 * e["cycles_integrated"], e
assert abs(d["settled_amplitude_v"] - 1.0) < 1e-3, d["settled_amplitude_v"]
assert d["solver"]["rhs_evals"] > 0
print("ok")
PY
    check "json engine keys" ok "$(tail -1 "$tmp/pyout")"
fi

sed 's/kick: {preset: {tank: 1m}}/kick: noise/' "$q" >"$tmp/noise.yaml"
"$ru" run "$tmp/noise.yaml" --engine envelope >"$tmp/out" 2>"$tmp/err"
check "noise kick refused" 1 $?
grepcheck "noise kick message" "--engine envelope: the noise kick" "$tmp/err"

# The default start (power-on with the resistors' thermal noise): auto still takes
# the envelope engine, with the noise off and its share of the start level put on
# the dominant mode. Reference: the method of averaging for this van der Pol tank,
# A(t)^2 = A_inf^2 / (1 + (A_inf^2/A0^2 - 1) e^(-2 sigma t)), sigma = (g1 - 1/R)/(2C)
# = 6.3245 /s, A_inf = 1 V (Strogatz, Nonlinear Dynamics and Chaos, 7.6, from
# memory), reaches 90 % at t = ln((A_inf^2/A0^2 - 1)/(1/0.81 - 1))/(2 sigma), A0 the
# start level the run states.
sed '/^run: /d' "$q" >"$tmp/default.yaml"
"$ru" run "$tmp/default.yaml" --json >"$tmp/json" 2>"$tmp/err"
check "default start, envelope" 0 $?
if [ -x "$py" ]; then
    "$py" - "$tmp/json" <<'PY' >"$tmp/pyout" 2>&1
import json, math, sys
d = json.load(open(sys.argv[1]))
assert d["engine"] == "envelope", d["engine"]
assert d["verdict"] == "started" and d["settled"], (d["verdict"], d["settled"])
assert any("the noise's share of the start level" in n for n in d["notes"]), d["notes"]
a0, sigma = d["predicted"]["start_level_v"], (1.58113883e-6 - 1 / 3.16227766e6) / 2e-7
t90 = math.log((1 / a0**2 - 1) / (1 / 0.81 - 1)) / (2 * sigma)
assert abs(d["startup_time_s"] / t90 - 1) < 0.01, (d["startup_time_s"], t90)
assert abs(d["settled_amplitude_v"] - 1.0) < 1e-3, d["settled_amplitude_v"]
print("ok")
PY
    check "default start: averaging's start-up time" ok "$(tail -1 "$tmp/pyout")"
fi

"$ru" run "$q" --engine direct --stop 20m --json >"$tmp/json" 2>"$tmp/err"
check "direct" 0 $?
grepcheck "direct engine key" '"engine": "direct"' "$tmp/json"
finish
