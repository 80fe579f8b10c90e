#!/usr/bin/env bash
# cli_crystal.sh: a run's crystal note: the frequency in ppm from fs and from the
# load frequency, the motional current and the drive power, and the warning above
# drive-limit.
# Reference (describing function of the cubic, the quasi-harmonic balance at the
# fundamental; analytic): a crystal (fs 1 MHz, q 1000, cm 10 pF, c0 100 pF, plus the
# node's 1 pF stray: C0' = 101 pF) in parallel with i = -g1 v + g3 v^3 oscillates
# where the node's susceptance vanishes, w C0' (R^2 + X^2) = X with X = w L - 1/(w cm)
# the arm's reactance (plus the susceptance of LB, the DC path: 100 mH with 30 kohm
# in series, which keeps DC and the 48 kHz mode of LB with C0' from growing), and
# settles where the cubic's effective conductance
# -g1 + 3/4 g3 V^2 cancels the arm's R/(R^2 + X^2) and LB's loss; the arm then carries
# I = V / sqrt(R^2 + X^2) and dissipates R I^2 / 2 (Butterworth-Van Dyke arm,
# Ohm's law). Tolerances: 1e-3 on V, I (the cubic's third harmonic, ~1 % of V,
# moves the fundamental by its square) and 2e-3 on the power; the ppm figures
# to 0.01 ppm of the run's own measured frequency (rounding of the note).
# Usage: cli_crystal.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"
py=/usr/bin/python3

cat >"$tmp/x.yaml" <<'YAML'
title: a crystal kept alive at its parallel resonance by a cubic conductance
parts:
  X1: {type: crystal, nodes: [a, gnd], freq: 1MHz, q: 1000, cm: 10p, c0: 100p,
       load: 30p, drive-limit: 1mW}
  G1: {type: poly-conductance, nodes: [a, gnd], coeffs: [0, -21.2e-6, 0, 18.8e-6]}
  LB: {type: inductor, nodes: [a, gnd], value: 100m, series: 30k}
run: {kick: {preset: {a: 0.9}}}
measure: {probe: a}
YAML
"$ru" run "$tmp/x.yaml" --engine direct --stop 2m --json >"$tmp/json" 2>"$tmp/err"
check "run" 0 $?
if [ -x "$py" ]; then
    "$py" - "$tmp/json" <<'PY' >"$tmp/pyout" 2>&1
import json, math, re, sys
d = json.load(open(sys.argv[1]))
assert d["settled"], d["verdict"]
fs, q, cm, c0 = 1e6, 1000.0, 10e-12, 101e-12
g1, g3, lb, rb = 21.2e-6, 18.8e-6, 0.1, 30e3
yb = lambda w: 1 / complex(rb, w * lb)
L = 1 / ((2 * math.pi * fs) ** 2 * cm)
R = 2 * math.pi * fs * L / q
X = lambda w: w * L - 1 / (w * cm)
def bisect(fn, lo, hi):
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if (fn(lo) < 0) == (fn(mid) < 0):
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)
w = bisect(lambda w: w * c0 - X(w) / (R * R + X(w) ** 2) + yb(w).imag,
           2 * math.pi * fs * 1.001, 2 * math.pi * fs * 1.2)
gx = R / (R * R + X(w) ** 2) + yb(w).real
V = math.sqrt(4 * (g1 - gx) / (3 * g3))
I = V / math.sqrt(R * R + X(w) ** 2)
P = R * I * I / 2
f = d["frequency_hz"]
assert abs(f / (w / 2 / math.pi) - 1) < 1e-4, (f, w / 2 / math.pi)
assert abs(d["fundamental_v"] / V - 1) < 1e-3, (d["fundamental_v"], V)
note = [n for n in d["notes"] if n.startswith("crystal X1:")]
assert len(note) == 1, d["notes"]
m = re.match(r"crystal X1: ([-+][0-9.]+) ppm from fs, ([-+][0-9.]+) ppm from its load "
             r"frequency at 30\.0 pF; motional current ([0-9.]+) (m|u)A peak, drive power "
             r"([0-9.]+) (m|u)W$", note[0])
assert m, note[0]
fl = fs * math.sqrt(1 + cm / (100e-12 + 30e-12))
assert abs(float(m.group(1)) - (f / fs - 1) * 1e6) < 0.01, (m.group(1), f)
assert abs(float(m.group(2)) - (f / fl - 1) * 1e6) < 0.01, (m.group(2), f, fl)
scale = {"m": 1e-3, "u": 1e-6}
i_got = float(m.group(3)) * scale[m.group(4)]
p_got = float(m.group(5)) * scale[m.group(6)]
assert abs(i_got / I - 1) < 1e-3, (i_got, I)
assert abs(p_got / P - 1) < 2e-3, (p_got, P)
print("ok %.6g A %.6g W" % (I, P))
PY
    check "crystal note against the balance" ok "$(tail -1 "$tmp/pyout" | cut -c1-2)"
    [ "$(tail -1 "$tmp/pyout" | cut -c1-2)" = ok ] || cat "$tmp/pyout"
fi

sed 's/drive-limit: 1mW/drive-limit: 1uW/' "$tmp/x.yaml" >"$tmp/over.yaml"
"$ru" run "$tmp/over.yaml" --engine direct --stop 2m >"$tmp/out" 2>"$tmp/err"
check "over the limit: run" 0 $?
grepcheck "drive-limit warning" "^note: warning: crystal X1: .*, above its drive-limit 1\.00 uW$" "$tmp/out"
finish
