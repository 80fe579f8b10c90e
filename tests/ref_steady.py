#!/usr/bin/python3
"""ref_steady.py: `ringup steady FILE --json` on the van der Pol oscillator against an
independent scipy integration at rtol 1e-12.

Usage: /usr/bin/python3 tests/ref_steady.py <ringup-binary> <source-dir>

The circuit (written here into a temporary folder): a tank of L = 1 H and C = 1 F
with a cubic conductance i = -eps v + (eps/3) v^3, so that (own derivation, node
equation and inductor law)
    C v' = -i_L + eps (v - v^3/3),   L i_L' = v,
which is Rayleigh's form; v obeys van der Pol's equation v'' - eps (1 - v^2) v' + v = 0
(differentiate once). The stray capacitance of 1 pF adds 1e-12 to C and moves the
period by 5e-13 relative, far below every tolerance here.

References:
- period and amplitude: scipy's DOP853 at rtol = atol = 1e-12 run 40 periods onto
  the limit cycle, then the extrema of v located by event detection (dv/dt = 0) at
  rtol 1e-13; the period is the spacing of successive maxima, the amplitude the
  maximum. Published cross-check (from memory): the van der Pol period at eps = 1
  is 6.6632868593..., amplitude 2.00861986...
- the Floquet multiplier other than 1, by Liouville's formula: the product of the
  multipliers is exp(integral over a period of the trace of the Jacobian), here
  exp(integral eps (1 - v^2) dt) (the trace is d(v')/dv + d(i_L')/d(i_L)); the
  integral is a quadrature state added to scipy's own integration.
Tolerances: the period to 1e-9 relative (what `steady` promises); the amplitude
(max - min)/2 to 1e-8 relative (root-found extrema at the final tolerance 1e-10; its
global error over a period is ~10x rtol); the multiplier to 1e-6 absolute (the
monodromy matrix comes from sensitivities under the same error test).
Exit 0 only when every check passes.
"""
import json
import math
import os
import subprocess
import sys
import tempfile

from scipy.integrate import solve_ivp

EPS = (1.0, 0.1)


def reference(eps):
    """Period, amplitude, second multiplier of van der Pol at eps (scipy)."""
    def f(t, y):
        v, il, _ = y
        return [-il + eps * (v - v ** 3 / 3.0), v, eps * (1.0 - v * v)]

    def top(t, y):  # dv/dt = 0 going downward: a maximum of v
        return -y[1] + eps * (y[0] - y[0] ** 3 / 3.0)
    top.direction = -1
    warm = solve_ivp(f, (0.0, 40 * 2 * math.pi), [2.0, 0.0, 0.0], method="DOP853",
                     rtol=1e-12, atol=1e-12)
    y0 = [warm.y[0, -1], warm.y[1, -1], 0.0]
    run = solve_ivp(f, (0.0, 4 * 2 * math.pi * (1 + eps)), y0, method="DOP853",
                    rtol=1e-13, atol=1e-13, events=top)
    te, ye = run.t_events[0], run.y_events[0]
    period = te[-1] - te[-2]
    amp = ye[-1][0]
    # trace integral over one period, from one maximum to the next
    seg = solve_ivp(f, (0.0, period), [ye[-2][0], ye[-2][1], 0.0], method="DOP853",
                    rtol=1e-13, atol=1e-13)
    return period, amp, math.exp(seg.y[2, -1])


def circuit(eps, path):
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("title: van der Pol, eps = %g\n" % eps)
        fh.write("parts:\n")
        fh.write("  L1: {type: inductor, nodes: [v, gnd], value: 1}\n")
        fh.write("  C1: {type: capacitor, nodes: [v, gnd], value: 1}\n")
        fh.write("  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %r, 0, %r]}\n"
                 % (-eps, eps / 3.0))
        fh.write("measure: {probe: v}\n")


def main():
    exe = sys.argv[1]
    bad = []
    with tempfile.TemporaryDirectory() as tmp:
        for eps in EPS:
            path = os.path.join(tmp, "vdp-%g.yaml" % eps)
            circuit(eps, path)
            out = subprocess.run([exe, "steady", path, "--json"], capture_output=True,
                                 text=True, check=False)
            if out.returncode != 0:
                bad.append("eps %g: exit %d: %s" % (eps, out.returncode, out.stderr))
                continue
            got = json.loads(out.stdout)
            per, amp, mu2 = reference(eps)
            gp, ga = got["period_s"], got["amplitude_v"]
            gm = got["multipliers"][1]
            dp, da, dm = abs(gp - per) / per, abs(ga - amp) / amp, abs(gm["re"] - mu2)
            print("eps %g: period %.13g (scipy %.13g, %.2g rel), amplitude %.11g "
                  "(scipy %.11g, %.2g rel), mu2 %.9g (Liouville %.9g)"
                  % (eps, gp, per, dp, ga, amp, da, gm["re"], mu2))
            if not dp <= 1e-9:
                bad.append("eps %g: period off by %.3g relative" % (eps, dp))
            if not da <= 1e-8:
                bad.append("eps %g: amplitude off by %.3g relative" % (eps, da))
            if not (dm <= 1e-6 and abs(gm["im"]) <= 1e-9):
                bad.append("eps %g: second multiplier %r, Liouville %.9g" % (eps, gm, mu2))
            if not abs(got["multipliers"][0]["re"] - 1.0) <= 1e-6:
                bad.append("eps %g: phase multiplier %r" % (eps, got["multipliers"][0]))
    for b in bad:
        print("FAIL:", b)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
