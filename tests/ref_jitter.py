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
# Our own values. "poly": van der Pol of parameter eps by a cubic conductance;
# "amp": a follower-tanh amplifier feeding its own input node (in = out), whose
# small-signal conductance (gain - 1)/rout is negative, offset by center so the
# orbit is not odd-symmetric (the flicker upconversion of an odd-symmetric orbit
# vanishes), with input noise en, inoise and a flicker corner fc.
CASES = (
    {"name": "eps 1", "L": 1e-3, "C": 1.0, "R": 1.0, "rs": 0.02, "eps": 1.0},
    {"name": "eps 3", "L": 1e-3, "C": 10e-6, "R": 1.0, "rs": 0.5, "eps": 3.0},
    {"name": "amplifier", "L": 10e-3, "C": 100e-9, "R": 1e3, "rs": 2.0,
     "amp": {"gain": 1.3, "swing": 0.5, "center": 0.1, "rout": 100.0,
             "en": 20e-9, "inoise": 2e-12, "fc": 1e3}},
)


def model(case):
    """f, its Jacobian and the noise sources [(part, kind, b(y), fc)] of a case."""
    L, C0, R, rs = case["L"], case["C"], case["R"], case["rs"]
    C = C0 + STRAY_F
    kt = KB * (TEMP_C + 273.15)
    if "eps" in case:
        g1 = 1.0 / R + case["eps"] * math.sqrt(C0 / L)
        g3 = g1 / 3.0

        def i_act(v):  # current the active part pushes into v, and its d/dv
            return g1 * v - g3 * v ** 3, g1 - 3.0 * g3 * v * v
    else:
        a = case["amp"]
        gn, sw, cen, ro = a["gain"], a["swing"], a["center"], a["rout"]

        def i_act(v):  # follower-tanh: i_out = (center + g sw tanh((vc-center)/sw) - vo)/rout
            th = math.tanh((v - cen) / sw)
            return ((cen + gn * sw * th - v) / ro, (gn * (1.0 - th * th) - 1.0) / ro)

    def f(y):
        v, il = y[0], y[1]
        return np.array([(-il - v / R + i_act(v)[0]) / C, (v - rs * il) / L])

    def jac(y):
        return np.array([[(-1.0 / R + i_act(y[0])[1]) / C, -1.0 / C],
                         [1.0 / L, -rs / L]])

    src = [("R1", "thermal", lambda y: np.array([math.sqrt(4 * kt / R) / C, 0.0]), 0.0),
           ("L1", "thermal", lambda y: np.array([0.0, math.sqrt(4 * kt * rs) / L]), 0.0)]
    if "amp" in case:
        a = case["amp"]

        def b_en(y):  # vc moves by en: i_out by its d/d vc = g (1 - th^2)/rout
            th = math.tanh((y[0] - a["center"]) / a["swing"])
            return np.array([a["en"] * a["gain"] * (1.0 - th * th) / a["rout"] / C, 0.0])
        src.append(("A1", "input voltage", b_en, a["fc"]))
        src.append(("A1", "input current",
                    lambda y: np.array([a["inoise"] / C, 0.0]), a["fc"]))
    return f, jac, src, 1.0 / math.sqrt(L * C)


def reference(case):
    """Period, c, c1, {(part, kind): c share} and the PPV's own check (numpy/scipy)."""
    f, jac, sources, w0 = model(case)
    t_guess = 2.0 * math.pi / w0 * (1.0 + 0.5 * case.get("eps", 1.0) ** 2)
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
    v1 = back.y[:, :-1]  # t = T down to T/NGRID: one full period
    xs = orbit.sol(ts[:-1])
    fx = np.array([f(xs[:, i]) for i in range(NGRID)]).T
    norm_err = float(np.max(abs(np.sum(v1 * fx, axis=0) - 1.0)))
    shares, c, c1 = {}, 0.0, 0.0
    for part, kind, b, fc in sources:
        proj = np.array([v1[:, i] @ b(xs[:, i]) for i in range(NGRID)])
        ck = 0.5 * np.mean(proj ** 2)  # trapezoid on a periodic grid = the mean
        shares[(part, kind)] = ck
        c += ck
        c1 += 0.5 * fc * np.mean(proj) ** 2
    return period, c, c1, shares, norm_err


def circuit(case, path):
    L, C, R, rs = case["L"], case["C"], case["R"], case["rs"]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("title: tank, %s\n" % case["name"])
        fh.write("parts:\n")
        fh.write("  L1: {type: inductor, nodes: [v, gnd], value: %r, series: %r}\n" % (L, rs))
        fh.write("  C1: {type: capacitor, nodes: [v, gnd], value: %r}\n" % C)
        fh.write("  R1: {type: resistor, nodes: [v, gnd], value: %r}\n" % R)
        if "eps" in case:
            g1 = 1.0 / R + case["eps"] * math.sqrt(C / L)
            fh.write("  G1: {type: poly-conductance, nodes: [v, gnd], coeffs: [0, %r, 0, %r]}\n"
                     % (-g1, g1 / 3.0))
        else:
            a = case["amp"]
            fh.write("  A1: {type: amplifier, in: v, out: v, law: follower-tanh, gain: %r, "
                     "swing: %r, center: %r, rout: %r, en: %r, inoise: %r, fc: %r}\n"
                     % (a["gain"], a["swing"], a["center"], a["rout"], a["en"],
                        a["inoise"], a["fc"]))
        fh.write("measure: {probe: v}\n")


def check(exe, tmp, case, bad):
    name = case["name"]
    path = os.path.join(tmp, "tank-%d.yaml" % len(bad))
    circuit(case, path)
    out = subprocess.run([exe, "jitter", path, "--json", "--temp", "%g" % TEMP_C],
                         capture_output=True, text=True, check=False)
    if out.returncode != 0:
        bad.append("%s: exit %d: %s" % (name, out.returncode, out.stderr))
        return
    got = json.loads(out.stdout)
    per, c_ref, c1_ref, shares, norm_err = reference(case)
    gc, gp, gc1 = got["phase_diffusion_s"], got["period_s"], got["flicker_coefficient_s_hz"]
    src = {(s["part"], s["kind"]): s["phase_diffusion_s"] for s in got["sources"]}
    dc, dp = abs(gc - c_ref) / c_ref, abs(gp - per) / per
    print("%s: c %.10g s (scipy %.10g, %.2g rel), period %.13g (scipy %.13g, %.2g rel), "
          "reference's |v1.f - 1| %.2g" % (name, gc, c_ref, dc, gp, per, dp, norm_err))
    if not dc <= 1e-6:
        bad.append("%s: c off by %.3g relative" % (name, dc))
    if set(src) != set(shares):
        bad.append("%s: sources %s, expected %s" % (name, sorted(src), sorted(shares)))
    for key, ck in shares.items():
        d = abs(src.get(key, math.nan) - ck) / c_ref
        print("  %s %s: %.10g (scipy %.10g)" % (key[0], key[1], src.get(key, math.nan), ck))
        if not d <= 1e-6:
            bad.append("%s: share of %s %s off by %.3g of c" % (name, key[0], key[1], d))
    fcs = [s[3] for s in model(case)[2]]
    if max(fcs) > 0:
        # c1 is a squared mean, a difference of large parts: held to 1e-6 of fc c,
        # the scale it would have if the projection had no alternating part
        d1 = abs(gc1 - c1_ref) / (max(fcs) * c_ref)
        print("  c1 %.10g s Hz (scipy %.10g), 1/f^3 corner %.6g Hz (scipy %.6g Hz)"
              % (gc1, c1_ref, got["flicker_corner_hz"], c1_ref / c_ref))
        if not (d1 <= 1e-6 and c1_ref > 1e-3 * max(fcs) * c_ref):
            bad.append("%s: c1 %.10g, scipy %.10g" % (name, gc1, c1_ref))
        if not abs(got["flicker_corner_hz"] - c1_ref / c_ref) <= 1e-6 * max(fcs):
            bad.append("%s: flicker corner %r, scipy %r" % (name, got["flicker_corner_hz"],
                                                           c1_ref / c_ref))
    elif gc1 != 0:
        bad.append("%s: c1 %r without a flicker source" % (name, gc1))
    if not dp <= 1e-9:
        bad.append("%s: period off by %.3g relative" % (name, dp))
    if not norm_err <= 1e-8:
        bad.append("%s: the reference's own PPV is off by %.3g" % (name, norm_err))


def main():
    exe = sys.argv[1]
    bad = []
    with tempfile.TemporaryDirectory() as tmp:
        for case in CASES:
            check(exe, tmp, case, bad)
    for b in bad:
        print("FAIL:", b)
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
