#!/usr/bin/env bash
# cli_sweep.sh: the sweep and montecarlo commands: exit statuses (0 done, 1 a bad
# --vary spec or sample count, naming the problem), one row per value, JSON on
# stdout that parses (Debian's /usr/bin/python3), an impossible value reported in
# its own row, a Monte Carlo whose small gain margin leaves units dead says so.
# References: the LC tank frequency 1/(2 pi sqrt(LC)) (the van der Pol tone sits
# within 1 % of it at eps = 0.16, Lindstedt-Poincare: w0 (1 - eps^2/16)).
# Usage: cli_sweep.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3

# A table with one row per value.
"$ru" sweep "$vdp" --vary L1.value=5m:20m:3 --threads 2 >"$tmp/out" 2>"$tmp/err"
check "sweep" 0 $?
rows=$(grep -Ec '^  [0-9.]+ mH +yes ' "$tmp/out")
check "sweep rows (3 values, all started)" 3 "$rows"

# Bad specifications: exit 1 with a message naming the problem.
"$ru" sweep "$vdp" --vary R9.value=1:2:3 >"$tmp/out" 2>"$tmp/err"
check "unknown part" 1 $?
grepcheck "unknown part message" "no part R9" "$tmp/err"
"$ru" sweep "$vdp" --vary L1.value=5m:20m >"$tmp/out" 2>"$tmp/err"
check "two fields" 1 $?
grepcheck "two fields message" "LO:HI:N" "$tmp/err"
"$ru" sweep "$vdp" --vary L1.value=5mF:20m:3 >"$tmp/out" 2>"$tmp/err"
check "wrong unit" 1 $?
grepcheck "wrong unit message" "unit F does not fit" "$tmp/err"
"$ru" sweep "$vdp" --vary L1.gain=1:2:3 >"$tmp/out" 2>"$tmp/err"
check "key of another type" 1 $?
grepcheck "key message" "gain is not a value of type inductor" "$tmp/err"
"$ru" sweep "$vdp" --vary G1.coeffs=1:2:3 >"$tmp/out" 2>"$tmp/err"
check "list key" 1 $?
"$ru" sweep "$vdp" --vary L1.value=-5m:5m:3 --log >"$tmp/out" 2>"$tmp/err"
check "log across zero" 1 $?
"$ru" sweep "$vdp" >"$tmp/out" 2>"$tmp/err"
check "no --vary" 1 $?

# JSON: keys, one entry per value, an impossible value (L <= 0) in its own entry,
# the tone against 1/(2 pi sqrt(LC)) with C = 100 nF.
"$ru" sweep "$vdp" --vary L1.value=-5m:20m:6 --stop 20m --json --threads 2 >"$tmp/s.json" 2>"$tmp/err"
check "sweep json" 0 $?
if [ -x $py ]; then
    $py - "$tmp/s.json" <<'PY'
import json, math, sys
d = json.load(open(sys.argv[1]))
assert d["vary"] == "L1.value" and d["unit"] == "H" and d["log"] is False, d
r = d["results"]
assert len(r) == 6, len(r)
assert "error" in r[0] and "error" in r[1], r[:2]          # -5 mH and 0 H refused
assert "value must be positive" in r[0]["error"], r[0]
for x in r[2:]:
    assert x["started"] is True, x
    f0 = 1 / (2 * math.pi * math.sqrt(x["value"] * 100e-9))
    assert abs(x["frequency_hz"] / f0 - 1) < 0.01, (x["value"], x["frequency_hz"], f0)
    assert abs(x["settled_amplitude_v"] - 2.0) < 0.01, x  # 2 sqrt(a/(3b)) = 2 V, any L
PY
    check "sweep json content" 0 $?
fi

# Pictures: the comparison figures, one envelope per value.
"$ru" sweep "$vdp" --vary C1.value=50n:200n:3 --log --plots "$tmp/pl" >"$tmp/out" 2>"$tmp/err"
check "sweep plots" 0 $?
[ -s "$tmp/pl/compare-envelopes.png" ] && passes=$((passes + 1)) || { echo "FAIL: no compare-envelopes.png"; fails=$((fails + 1)); }

# Monte Carlo of a Wien bridge with a 2 % gain margin and 10 % capacitors (our own
# values): some units cannot start, and the verdict says so.
cat >"$tmp/wien.yaml" <<'YAML'
title: Wien bridge, small gain margin
parts:
  A1: {type: amplifier, in: p, inv: n, out: o, model: general-opamp}
  RS: {type: resistor, nodes: [o, s], value: 15k, tol: 1%}
  CS: {type: capacitor, nodes: [s, p], value: 10n, tol: 10%}
  RP: {type: resistor, nodes: [p, gnd], value: 15k, tol: 1%}
  CP: {type: capacitor, nodes: [p, gnd], value: 10n, tol: 10%}
  RF: {type: resistor, nodes: [o, n], value: 20.6k, tol: 1%}
  RG: {type: resistor, nodes: [n, gnd], value: 10k, tol: 1%}
run: {stop: 150m, kick: {preset: {p: 1m}}}
measure: {probe: o}
YAML
"$ru" montecarlo "$tmp/wien.yaml" --samples 12 --threads 2 >"$tmp/mc.txt" 2>"$tmp/err"
check "montecarlo" 0 $?
grepcheck "verdict" "^starts on every unit: no \([0-9]+ of 12 started" "$tmp/mc.txt"
grepcheck "dead unit listed" "unit [0-9]+: no-start, .*poles' growth -" "$tmp/mc.txt"
grepcheck "drawn values listed" "CS [0-9.]+ nF \([+-][0-9.]+%\)" "$tmp/mc.txt"
"$ru" montecarlo "$tmp/wien.yaml" --samples 12 --threads 1 --json >"$tmp/mc.json" 2>"$tmp/err"
check "montecarlo json" 0 $?
if [ -x $py ]; then
    $py - "$tmp/mc.json" "$tmp/mc.txt" <<'PY'
import json, re, sys
d = json.load(open(sys.argv[1]))
assert d["samples"] == 12 and len(d["units"]) == 12, d["samples"]
assert d["all_started"] is False and 0 < d["started_count"] < 12, d["started_count"]
# the same draws and figures as the 2-thread table run
m = re.search(r"\((\d+) of 12 started", open(sys.argv[2]).read())
assert int(m.group(1)) == d["started_count"], (m.group(1), d["started_count"])
for k in ("startup_time_s", "growth_rate_per_s", "frequency_hz", "settled_amplitude_v",
          "thd_percent"):
    s = d["stats"][k]
    assert s["n"] > 0 and s["min"] <= s["p05"] <= s["mean"] <= s["max"], (k, s)
u0 = d["units"][0]
assert u0["index"] == 0 and u0["started"] is True, u0             # the nominal unit
assert u0["values"] == {"RS": 15e3, "CS": 10e-9, "RP": 15e3, "CP": 10e-9, "RF": 20.6e3,
                        "RG": 10e3}, u0["values"]
for u in d["units"][1:]:
    v = u["values"]
    assert abs(v["CS"] / 10e-9 - 1) <= 0.1 and abs(v["RF"] / 20.6e3 - 1) <= 0.01, v
PY
    check "montecarlo json content" 0 $?
fi

# Refusals: too many samples, a bad distribution, no tolerance in the circuit.
"$ru" montecarlo "$tmp/wien.yaml" --samples 10001 >"$tmp/out" 2>"$tmp/err"
check "too many samples" 1 $?
grepcheck "too many samples message" "from 1 to 10000" "$tmp/err"
"$ru" montecarlo "$tmp/wien.yaml" --samples 3 --distribution cauchy >"$tmp/out" 2>"$tmp/err"
check "bad distribution" 1 $?
"$ru" montecarlo "$vdp" --samples 3 >"$tmp/out" 2>"$tmp/err"
check "no tolerance" 1 $?
grepcheck "no tolerance message" "no part has a tolerance" "$tmp/err"

# Robustness (regression): op-amps leaving their rails at draft accuracy must not
# fail numerically; seed 1 units 0..22 include three that once did.
"$ru" montecarlo "$src/tests/data/montecarlo/wien-clip.yaml" --samples 23 --json \
    >"$tmp/clip.json" 2>"$tmp/err"
check "clipping montecarlo" 0 $?
if [ -x /usr/bin/python3 ]; then
    /usr/bin/python3 -c 'import json,sys; d=json.load(open(sys.argv[1])); assert d["failed_count"] == 0, d["failed_count"]' "$tmp/clip.json"
    check "no numerical failure while clipping" 0 $?
fi

finish
