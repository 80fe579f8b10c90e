#!/usr/bin/python3
"""ref_diffpair.py: the settled swing of a cross-coupled bipolar pair
(diff-pair-tanh with both collector currents, out and out2) from
`ringup run FILE --json` against the describing-function balance computed here
with scipy.

Usage: /usr/bin/python3 tests/ref_diffpair.py <ringup-binary> <source-dir>

The circuit (written here, our own values): two parallel tanks L, C, Rp from a
5 V supply to the collectors c1 and c2, a pair with tail current itail whose in
side has its base on c2 and its collector on c1 (inv on c1, out2 on c2), so the
base voltage difference is vd = v(c2) - v(c1). Each collector sinks
itail/2 (1 +- tanh(vd/(2 vt))) (two Shockley junctions sharing the tail; own
derivation). With vd = A sin(t) the fundamental of each collector current is
I1(A) = (itail/2) (1/pi) int_0^2pi tanh(A sin t/(2 vt)) sin t dt, and at the
tanks' resonance each collector swings I1 Rp in opposite phase, so
vd = 2 Rp I1(A) sin t: the balance A = 2 Rp I1(A) (the describing-function
method, e.g. Gelb & Vander Velde 1968, from memory; the tanks' Q of 32 filters
the harmonics).

Reference: scipy.integrate.quad for I1 (epsabs 1e-14) and scipy.optimize.brentq
for the balance (xtol 1e-12). Checks (the run starts at power-on with noise, the
probe is c1):
  - two collectors: c1's measured fundamental within 0.2 % of A/2 (measured
    -0.004 %: the describing function drops the harmonics' effect on the
    switching instants, the tank's third harmonic being 0.4 % of the
    fundamental), verdict started;
  - the frequency within 0.1 % of 1/(2 pi sqrt(L (C + stray))) (measured
    -0.012 %; the limiter's harmonics pull it by about 1/Q^2 = 0.1 %);
  - the one-output form (sign -1: the mirror-loaded pair's whole differential
    current itail tanh(vd/(2 vt)) into c1, c2 a bare tank) swings c1 by
    A1 = Rp 2 I1(A1) = A, twice the two-collector swing (own derivation): within
    0.2 % of A. The two forms differ by a factor 2 on c1, so the first check
    cannot pass with the wrong one.
Exit 0 only when every check passes.
"""
import json
import math
import os
import subprocess
import sys
import tempfile

import scipy.integrate
import scipy.optimize

K_OVER_Q = 8.617333262e-5  # NIST CODATA 2018, V/K
L_H, C_F, RP_OHM, ITAIL_A, STRAY_F = 1e-6, 250e-12, 2e3, 1e-3, 1e-12
VT = K_OVER_Q * (27.0 + 273.15)


def circuit(two_outputs):
    pair = ("  Q: {type: amplifier, law: diff-pair-tanh, in: c2, inv: c1, out: c1, "
            "out2: c2, itail: 1m}\n" if two_outputs else
            "  Q: {type: amplifier, law: diff-pair-tanh, in: c2, inv: c1, out: c1, "
            "itail: 1m, sign: -1}\n")
    return ("title: cross-coupled pair, 10 MHz\nstray: 1p\nparts:\n"
            "  VCC: {type: supply, nodes: [vcc, gnd], value: 5V}\n"
            "  L1: {type: inductor, nodes: [vcc, c1], value: 1u}\n"
            "  C1: {type: capacitor, nodes: [c1, vcc], value: 250p}\n"
            "  R1: {type: resistor, nodes: [c1, vcc], value: 2k}\n"
            "  L2: {type: inductor, nodes: [vcc, c2], value: 1u}\n"
            "  C2: {type: capacitor, nodes: [c2, vcc], value: 250p}\n"
            "  R2: {type: resistor, nodes: [c2, vcc], value: 2k}\n" + pair +
            "measure: {probe: c1}\n")


def fundamental(amp):
    """I1(A): the fundamental amplitude of one collector's current."""
    val, _ = scipy.integrate.quad(
        lambda t: math.tanh(amp * math.sin(t) / (2 * VT)) * math.sin(t), 0, 2 * math.pi,
        epsabs=1e-14, limit=200)
    return ITAIL_A / 2 * val / math.pi


def balance():
    return scipy.optimize.brentq(lambda a: 2 * RP_OHM * fundamental(a) - a, 1e-3, 10.0,
                                 xtol=1e-12)


def run(ringup, text):
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "pair.yaml")
        with open(path, "w") as f:
            f.write(text)
        proc = subprocess.run([ringup, "run", path, "--json"], capture_output=True,
                              text=True, timeout=300, cwd=tmp)
    if proc.returncode != 0:
        sys.exit("ringup run failed (%d): %s" % (proc.returncode, proc.stderr))
    return json.loads(proc.stdout)


def main():
    ringup = os.path.abspath(sys.argv[1])
    want = balance()
    f0 = 1 / (2 * math.pi * math.sqrt(L_H * (C_F + STRAY_F)))
    ok = True
    got = run(ringup, circuit(True))
    amp, freq = got["fundamental_v"], got["frequency_hz"]
    print("two collectors: c1 fundamental %.5g V, balance A/2 %.5g V (%+.3f %%), "
          "verdict %s; frequency %.6g Hz, tank %.6g Hz (%+.3f %%)"
          % (amp, want / 2, 100 * (amp / (want / 2) - 1), got["verdict"], freq, f0,
             100 * (freq / f0 - 1)))
    if got["verdict"] != "started" or abs(amp / (want / 2) - 1) > 0.002:
        print("FAIL: swing off the describing-function balance")
        ok = False
    if abs(freq / f0 - 1) > 0.001:
        print("FAIL: frequency off the tanks' resonance")
        ok = False
    got = run(ringup, circuit(False))
    one = got["fundamental_v"]
    print("one output: c1 fundamental %.5g V, balance A %.5g V (%+.3f %%), verdict %s"
          % (one, want, 100 * (one / want - 1), got["verdict"]))
    if got["verdict"] != "started" or abs(one / want - 1) > 0.002:
        print("FAIL: the one-output form off its balance")
        ok = False
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
