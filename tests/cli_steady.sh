#!/usr/bin/env bash
# cli_steady.sh: `ringup steady` as a user meets it: exit statuses, the JSON keys,
# steady.csv (one period of every node), the figures, refusals with their messages.
# Usage: cli_steady.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
export RINGUP_MODELS=${RINGUP_MODELS:-$src/models}

# JSON of the van der Pol tank: every promised key; the tone against the hand
# figures (Reference: method of averaging 2 sqrt(a/(3b)) = 2.0 V for a = 0.5 mS,
# b = 0.1667 mA/V^3, within 0.1 % (eps = 0.16 shifts it by O(eps^2)); frequency
# w0 (1 - eps^2/16) (Lindstedt-Poincare, eps = a sqrt(L/C) = 0.158) within 1e-4
# (the next term is O(eps^4)); multiplier exp(-2 pi eps) (averaging) within 1 %).
"$ru" steady "$vdp" --json >"$tmp/j" 2>"$tmp/err"
check "json: status" 0 $?
/usr/bin/python3 - "$tmp/j" >"$tmp/out" 2>&1 <<'PY'
import json, math, sys
d = json.load(open(sys.argv[1]))
for k in ("frequency_hz", "period_s", "amplitude_v", "dc_level_v", "thd_percent",
          "harmonics_dbc", "multipliers", "recovery_time_s", "newton_iterations"):
    assert k in d, k
assert d["found"] is True and len(d["harmonics_dbc"]) == 9
a, b, L, C = 0.5e-3, 0.1667e-3, 10e-3, 100e-9
eps = a * math.sqrt(L / C)
w0 = 1 / math.sqrt(L * C)
assert abs(d["amplitude_v"] / (2 * math.sqrt(a / (3 * b))) - 1) < 1e-3, d["amplitude_v"]
f = w0 * (1 - eps ** 2 / 16) / (2 * math.pi)
assert abs(d["frequency_hz"] / f - 1) < 1e-4, (d["frequency_hz"], f)
assert abs(d["period_s"] * d["frequency_hz"] - 1) < 1e-9  # 10 digits printed
m = d["multipliers"]
assert abs(m[0]["re"] - 1) < 1e-6 and abs(m[1]["re"] / math.exp(-2 * math.pi * eps) - 1) < 1e-2, m
assert abs(d["recovery_time_s"] * eps * w0 - 1) < 1e-2, d["recovery_time_s"]
print("ok")
PY
grepcheck "json: keys and figures" "^ok$" "$tmp/out"

# steady.csv: a header of every node, one period on the grid (1024 rows), the time
# column from 0 to just under the period.
"$ru" steady "$src/examples/rc-ladder-npn.yaml" --out "$tmp/o" >"$tmp/out" 2>"$tmp/err"
check "csv: status" 0 $?
grepcheck "csv: header" "^time_s,vcc,col,base,emit,e2,n1,n2$" "$tmp/o/steady.csv"
check "csv: rows" 1025 "$(wc -l <"$tmp/o/steady.csv")"
grepcheck "text: names the method and start" "shooting Newton, started from the describing function" "$tmp/out"
grepcheck "text: supply at its final value" "^0,9," "$tmp/o/steady.csv"

# figures: one period, harmonics, Floquet multipliers
"$ru" steady "$vdp" --plots "$tmp/p" >/dev/null 2>"$tmp/err"
check "plots: status" 0 $?
for f in steady spectrum floquet; do
    check "plots: $f.png" yes "$( [ -s "$tmp/p/$f.png" ] && echo yes || echo no)"
done

# a driven circuit is refused with its place and part (exit 1)
printf 'parts:\n  VS: {type: supply, nodes: [a, gnd], wave: sine, amplitude: 1, freq: 1k}\n  R1: {type: resistor, nodes: [a, b], value: 1k}\n  C1: {type: capacitor, nodes: [b, gnd], value: 1u}\n' >"$tmp/d.yaml"
"$ru" steady "$tmp/d.yaml" >"$tmp/out" 2>"$tmp/err"
check "driven: status" 1 $?
grepcheck "driven: message" "d.yaml:2:[0-9]+: part VS: a periodic sine drives the circuit" "$tmp/err"

# no oscillation is a result (exit 0), with the reason
printf 'parts:\n  L1: {type: inductor, nodes: [t, gnd], value: 10mH}\n  C1: {type: capacitor, nodes: [t, gnd], value: 100n}\n  R1: {type: resistor, nodes: [t, gnd], value: 1k}\n' >"$tmp/s.yaml"
"$ru" steady "$tmp/s.yaml" --json >"$tmp/out" 2>"$tmp/err"
check "no tone: status" 0 $?
grepcheck "no tone: found false" '"found": false' "$tmp/out"
grepcheck "no tone: reason" "operating point is stable" "$tmp/out"

# bad options
"$ru" steady "$vdp" --rtol 1 >/dev/null 2>"$tmp/err"
check "bad rtol: status" 1 $?
"$ru" steady "$vdp" --grid 10 >/dev/null 2>"$tmp/err"
check "bad grid: status" 1 $?
grepcheck "bad grid: message" "grid must be" "$tmp/err"

finish
