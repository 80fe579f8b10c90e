#!/usr/bin/env bash
# cli_response.sh: `response` over a narrow span around a sharp resonance: the
# frequency grid is refined where the curve turns (no step above 1 dB or 10 degrees
# between neighbours), the peak is among the points, and the figure is drawn on an
# offset axis. The network is a crystal-like series arm (Butterworth-Van Dyke
# motional arm with its shunt capacitance) into a load; the reference is its closed
# form evaluated with numpy (Debian's python3-numpy).
# Usage: cli_response.sh RINGUP_BINARY SOURCE_DIR
set -u
ru=$1
src=$2
. "$(dirname "$0")/clitest.sh"

cat >"$tmp/xt.yaml" <<'YAML'
title: crystal-like arm into a load
stray: 1e-27
parts:
  RS: {type: resistor,  nodes: [a, gnd], value: 1k}
  LM: {type: inductor,  nodes: [a, m],   value: 63.3m}
  CM: {type: capacitor, nodes: [m, n],   value: 25f}
  RM: {type: resistor,  nodes: [n, b],   value: 30}
  C0: {type: capacitor, nodes: [a, b],   value: 5p}
  RL: {type: resistor,  nodes: [b, gnd], value: 50}
YAML
"$ru" response "$tmp/xt.yaml" --from a --to b --fmin 3.995M --fmax 4.012M --points 21 \
    --json >"$tmp/j" 2>"$tmp/err"
check "narrow response" 0 $?
if [ -x /usr/bin/python3 ] && /usr/bin/python3 -c 'import numpy' 2>/dev/null; then
    ok=$(/usr/bin/python3 - "$tmp/j" <<'PY'
import json, sys
import numpy as np
d = json.load(open(sys.argv[1]))
f = np.array([p["f_hz"] for p in d["points"]])
m = np.array([p["mag"] for p in d["points"]])
ph = np.array([p["phase_deg"] for p in d["points"]])
# Reference: v(b)/v(a) = RL / (RL + Zarm || Z0), Zarm = RM + j(wL - 1/(wC)),
# Z0 = 1/(jwC0) (the series arm and its shunt capacitance; closed form).
L, C, RM, C0, RL = 63.3e-3, 25e-15, 30.0, 5e-12, 50.0
def h(fr):
    w = 2 * np.pi * fr
    za = RM + 1j * (w * L - 1 / (w * C))
    z0 = 1 / (1j * w * C0)
    return RL / (RL + za * z0 / (za + z0))
fine = np.linspace(3.995e6, 4.012e6, 2000001)
k = np.argmax(abs(h(fine)))
good = True
# every point is the closed form: 2e-5 relative where the gain is above -60 dB (a
# linear solve, read back at JSON's 10 significant digits of f, on flanks where
# |H| moves 0.5 % per hertz); in the antiresonance notch (down to -90 dB) 1 %
ref = abs(h(f))
good &= bool(np.all(abs(m / ref - 1) < np.where(ref > 1e-3, 2e-5, 1e-2)))
# the peak is found (frequency within 1 Hz of the fine grid's, 0.25 Hz spacing plus
# the search's tolerance) and is among the points
good &= abs(d["peak"]["f_hz"] - fine[k]) < 1.0 and abs(m.max() / abs(h(fine[k])) - 1) < 1e-6
# refined: no step between neighbours above 1 dB or 10 degrees (common practice for
# a curve that reads smooth on a plot), although 21 grid points were asked for
db = 20 * np.log10(m)
dp = np.diff(ph); dp -= 360 * np.round(dp / 360)
good &= bool(np.all(abs(np.diff(db)) <= 1.0 + 1e-9) and np.all(abs(dp) <= 10.0 + 1e-9))
good &= len(f) > 21
print(1 if good else 0)
PY
)
    check "refined grid against the closed form" 1 "$ok"
fi
"$ru" response "$tmp/xt.yaml" --from a --to b --fmin 3.995M --fmax 4.012M --points 21 \
    --plots "$tmp/p" >"$tmp/out" 2>"$tmp/err"
check "narrow response plot" 0 $?
[ -s "$tmp/p/response.png" ] && passes=$((passes + 1)) || { echo "FAIL: no response.png"; fails=$((fails + 1)); }

finish
