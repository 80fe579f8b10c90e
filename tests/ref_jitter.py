#!/usr/bin/python3
"""ref_jitter.py: `ringup jitter FILE --json` on strongly nonlinear van der Pol tanks
against an independent numpy/scipy computation of the perturbation projection vector.

Usage: /usr/bin/python3 tests/ref_jitter.py <ringup-binary> <source-dir>

The method (Demir, Mehrotra and Roychowdhury, "Phase noise in oscillators: a unifying
theory and numerical methods for characterization", IEEE Trans. Circuits Syst. I 47
(2000) 655): along the limit cycle x_s(t) of x' = f(x) + B(x) w(t), the PPV v1(t) is
the periodic solution of the adjoint equation v' = -J^T v with v1(t) . x_s'(t) = 1,
and the phase diffusion constant is c = (1/T) integral over a period of
sum_k (v1 . B_k)^2 / 2 (unit one-sided densities, hence the 1/2).

The reference here shares no code with ringup and takes its own road to v1:
- the limit cycle by scipy's DOP853 (rtol 1e-12, 60 periods of settling), the period
  and x0 by event detection on a Poincare section (v = 0 going upward, rtol 1e-13),
  one period kept as DOP853's dense output;
- v1 by power iteration of the adjoint: from any v with v . f(x0) = 1, the adjoint
  integrated backward over a period again and again (scipy, rtol 1e-13), renormalised
  each time, until it repeats to 1e-14; backward in time the adjoint keeps the
  multiplier-1 direction and shrinks the others by mu2 per period, so no eigenvector
  and no monodromy matrix are needed (ringup takes the left eigenvector of its
  CVODES monodromy matrix and integrates one period back with the CVODES adjoint
  module). Inverting the forward state transition matrix, v1(t) = Phi(t,0)^-T v1(0),
  was tried first and is ill-conditioned for strong nonlinearity: 2 % off at eps = 3,
  where mu2 is tiny;
- the period integral by the trapezoid rule on 2048 points (spectrally accurate for a
  smooth periodic integrand: 8192 and 32768 points move c by < 1e-15 relative).

The circuit (written into a temporary folder; own derivation from the node equation
and the inductor law): a tank L || C with a resistor R and a cubic conductance
i = -g1 v + g3 v^3, the inductor with a series resistance rs:
    C v' = -i_L - v/R + g1 v - g3 v^3 + i_n,     L i_L' = v - rs i_L + e_n,
with i_n of one-sided density 4kT/R (Johnson-Nyquist) and e_n of 4kT rs, so the noise
columns are B_R = [sqrt(4kT/R)/C, 0] and B_L = [0, sqrt(4kT rs)/L]. C carries the
node's 1 pF stray capacitance (what `ringup check` lists). g1 = 1/R + eps sqrt(C/L)
makes it van der Pol of parameter eps (plus the small series loss).

Checks, for eps = 1 and 3 (far from the harmonic limit that tests/test_jitter.c checks):
- c to 1e-6 relative, and each source's share to 1e-6 of c (measured 1e-8: ringup
  integrates at rtol 1e-10 and reports its PPV's normalisation error, ~1e-8, which
  enters c at twice its size; 100x room);
- the period to 1e-9 relative (what `steady` promises);
- and the invariant v1(t) . f(x_s(t)) = 1 on the reference's own grid to 1e-8 (a
  check of the reference itself: it holds at every t for the true PPV).
Exit 0 only when every check passes.
"""
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.integrate import solve_ivp

KB = 1.380649e-23  # Boltzmann's constant, exact in the 2019 SI
STRAY_F = 1e-12
TEMP_C = 27.0
NGRID = 2048
CASES = ((1.0, 1e-3, 1.0, 1.0, 0.02), (3.0, 1e-3, 10e-6, 1.0, 0.5))  # eps, L, C, R, rs


def reference(eps, L, C0, R, rs):
    """Period, total c and the per-source shares [R, L] of the tank (numpy/scipy)."""
    C = C0 + STRAY_F
    g1 = 1.0 / R + eps * math.sqrt(C0 / L)
    g3 = g1 / 3.0
    kt = KB * (TEMP_C + 273.15)

    def f(y):
        v, il = y[0], y[1]
        return np.array([(-il - v / R + g1 * v - g3 * v ** 3) / C, (v - rs * il) / L])

    def jac(y):
        v = y[0]
        return np.array([[(-1.0 / R + g1 - 3.0 * g3 * v * v) / C, -1.0 / C],
                         [1.0 / L, -rs / L]])

    w0 = 1.0 / math.sqrt(L * C)
    t_guess = 2.0 * math.pi / w0 * (1.0 + 0.5 * eps * eps)
    warm = solve_ivp(lambda t, y: f(y), (0.0, 60 * t_guess), [0.1, 0.0], method="DOP853",
                     rtol=1e-12, atol=1e-15)

    def up(t, y):  # v crossing 0 upward
        return y[0]
    up.direction = 1
    run = solve_ivp(lambda t, y: f(y), (0.0, 3 * t_guess), warm.y[:, -1], method="DOP853",
                    rtol=1e-13, atol=1e-15, events=up)
    te, ye = run.t_events[0], run.y_events[0]
    period = te[-1] - te[-2]
    x0 = ye[-2]
    orbit = solve_ivp(lambda t, y: f(y), (0.0, period), x0, method="DOP853", rtol=1e-13,
                      atol=1e-15, dense_output=True)

    def adjoint(t, v):
        return -jac(orbit.sol(t)).T @ v
    v = f(x0) / (f(x0) @ f(x0))  # any start with v . f(x0) = 1
    for _ in range(400):
        back = solve_ivp(adjoint, (period, 0.0), v, method="DOP853", rtol=1e-13, atol=1e-30)
        nv = back.y[:, -1] / (back.y[:, -1] @ f(x0))
        done = np.max(abs(nv - v)) <= 1e-14 * np.max(abs(nv))
        v = nv
        if done:
            break
    else:
        raise RuntimeError("the backward adjoint did not converge to the PPV")
    ts = np.linspace(period, 0.0, NGRID + 1)
    back = solve_ivp(adjoint, (period, 0.0), v, method="DOP853", rtol=1e-13, atol=1e-30,
                     t_eval=ts)
    b_r = math.sqrt(4 * kt / R) / C
    b_l = math.sqrt(4 * kt * rs) / L
    v1 = back.y[:, :-1]  # t = T down to T/NGRID: one full period
    xs = orbit.sol(ts[:-1])
    fx = np.array([f(xs[:, i]) for i in range(NGRID)]).T
    norm_err = float(np.max(abs(np.sum(v1 * fx, axis=0) - 1.0)))
    proj_r, proj_l = v1[0] * b_r, v1[1] * b_l
    c_r = 0.5 * np.mean(proj_r ** 2)  # trapezoid on a periodic grid = the mean
    c_l = 0.5 * np.mean(proj_l ** 2)
    return period, c_r + c_l, (c_r, c_l), norm_err


def circuit(eps, L, C, R, rs, path):
    g1 = 1.0 / R + eps * math.sqrt(C / L)
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("title: van der Pol tank, eps = %g\n" % eps)
        fh.write("parts:\n")
        fh.write("  L1: {type: inductor, nodes: [v, gnd], value: %r, series: %r}\n" % (L, rs))
        fh.write("  C1: {type: capacitor, nodes: [v, gnd], value: %r}\n" % C)
        fh.write("  R1: {type: resistor, nodes: [v, gnd], value: %r}\n" % R)
        fh.write("  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %r, 0, %r]}\n"
                 % (-g1, g1 / 3.0))
        fh.write("measure: {probe: v}\n")


def main():
    exe = sys.argv[1]
    bad = []
    with tempfile.TemporaryDirectory() as tmp:
        for eps, L, C, R, rs in CASES:
            path = os.path.join(tmp, "vdp-%g.yaml" % eps)
            circuit(eps, L, C, R, rs, path)
            out = subprocess.run([exe, "jitter", path, "--json", "--temp", "%g" % TEMP_C],
                                 capture_output=True, text=True, check=False)
            if out.returncode != 0:
                bad.append("eps %g: exit %d: %s" % (eps, out.returncode, out.stderr))
                continue
            got = json.loads(out.stdout)
            per, c_ref, shares, norm_err = reference(eps, L, C, R, rs)
            gc, gp = got["phase_diffusion_s"], got["period_s"]
            src = {s["part"]: s["phase_diffusion_s"] for s in got["sources"]}
            dc, dp = abs(gc - c_ref) / c_ref, abs(gp - per) / per
            dr = abs(src.get("R1", math.nan) - shares[0]) / c_ref
            dl = abs(src.get("L1", math.nan) - shares[1]) / c_ref
            print("eps %g: c %.10g s (scipy %.10g, %.2g rel), R1 %.10g (scipy %.10g), "
                  "L1 %.10g (scipy %.10g), period %.13g (scipy %.13g, %.2g rel), "
                  "reference's |v1.f - 1| %.2g"
                  % (eps, gc, c_ref, dc, src.get("R1", math.nan), shares[0],
                     src.get("L1", math.nan), shares[1], gp, per, dp, norm_err))
            if not dc <= 1e-6:
                bad.append("eps %g: c off by %.3g relative" % (eps, dc))
            if not (dr <= 1e-6 and dl <= 1e-6):
                bad.append("eps %g: shares off by %.3g, %.3g of c" % (eps, dr, dl))
            if not dp <= 1e-9:
                bad.append("eps %g: period off by %.3g relative" % (eps, dp))
            if not norm_err <= 1e-8:
                bad.append("eps %g: the reference's own PPV is off by %.3g" % (eps, norm_err))
    for b in bad:
        print("FAIL:", b)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
