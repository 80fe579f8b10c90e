#!/usr/bin/python3
"""ref_poles.py: poles of small circuits from `ringup poles FILE --json` against an
independent model built here by hand with numpy/scipy.

Usage: /usr/bin/python3 tests/ref_poles.py <ringup-binary> <source-dir>

For each circuit in tests/data/smallsig/ this script writes its own node equations
(own derivation, below): states are the free node voltages and the inductor
currents, M x' = r(x) with M = blockdiag(C, I) where C holds the capacitors and the
stray capacitance (stray: 1p in every file) from each free node to ground. The
operating point is solved with scipy.optimize.fsolve, the state matrix is
J = M^{-1} dr/dx there, and the reference poles are scipy.linalg.eig(J).

Each ringup pole must match a reference pole within 1e-6 * |pole| + 1e-12 * max|pole|
(eigenvalues carry ~1e-16 * |J| absolute error, i.e. ~1e-6 /s for the 5e9 /s stray
pole of biased_follower_tank, far below 1e-12 * max|pole|; 1e-6 relative leaves room
for the operating point, converged to ~1e-9 V, and for JSON printed with 7 or more
significant digits). The list must be sorted by real
part, largest first, and `dominant` must be the complex pole with im > 0 of largest
real part. Part values are read back from the YAML file and compared with the
constants used here, so the two cannot drift apart silently. Exit 0 only when every
check passes.
"""
import json
import math
import os
import subprocess
import sys

import numpy as np
import scipy.linalg
import scipy.optimize
import yaml

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from refutil import si  # noqa: E402  (shared with the other reference checks)



def check_values(path, want):
    """Every (part, key) -> value in `want` must equal the file's value."""
    with open(path, encoding="utf-8") as fh:
        doc = yaml.safe_load(fh)
    bad = []
    same = lambda a, b: abs(a - b) <= 1e-12 * max(abs(a), abs(b))
    if not same(si(doc.get("stray", "1p")), want.pop("stray")):
        bad.append("stray")
    for (part, key), val in want.items():
        got = doc["parts"][part][key]
        got = [si(v) for v in got] if isinstance(got, list) else [si(got)]
        exp = val if isinstance(val, list) else [val]
        if len(got) != len(exp) or not all(same(a, b) for a, b in zip(got, exp)):
            bad.append("%s.%s: file %r, model %r" % (part, key, got, val))
    return bad


# ---- circuit models (own derivation) -------------------------------------------

def vdp_lossy_tank():
    """States [v_t, i_L]. r_t = -i_L - v/RP - i_G(v); r_L = (v - Rs i_L)/L."""
    L, Rs, C, RP, cs = 10e-3, 5.0, 47e-9, 10e3, 1e-12
    k = [0.0, -2e-3, 0.0, 0.5e-3]
    want = {"stray": cs, ("L1", "value"): L, ("L1", "series"): Rs,
            ("C1", "value"): C, ("RP", "value"): RP, ("G1", "coeffs"): k}

    def resid(x):
        v, i = x
        ig = sum(c * v ** j for j, c in enumerate(k))
        return [-i - v / RP - ig, (v - Rs * i) / L]

    def jac(x):
        v = x[0]
        g = sum(j * c * v ** (j - 1) for j, c in enumerate(k) if j > 0)
        return np.array([[-1.0 / RP - g, -1.0], [1.0 / L, -Rs / L]])

    mass = np.diag([C + cs, 1.0])
    return want, resid, jac, mass, [0.0, 0.0], {"t": 0}


def rc_ladder_bridged():
    """States [v1, v2, v3]; vcc = 5 V is driven. Linear."""
    vs, r1, r2, r3, r4 = 5.0, 10e3, 10e3, 10e3, 47e3
    c1, c2, c3, cb, cs = 10e-9, 10e-9, 10e-9, 2.2e-9, 1e-12
    want = {"stray": cs, ("VS", "value"): vs, ("R1", "value"): r1,
            ("R2", "value"): r2, ("R3", "value"): r3, ("R4", "value"): r4,
            ("C1", "value"): c1, ("C2", "value"): c2, ("C3", "value"): c3,
            ("CB", "value"): cb}
    g = np.array([[-1 / r1 - 1 / r2, 1 / r2, 0.0],
                  [1 / r2, -1 / r2 - 1 / r3, 1 / r3],
                  [0.0, 1 / r3, -1 / r3 - 1 / r4]])
    src = np.array([vs / r1, 0.0, 0.0])

    def resid(x):
        return g @ np.asarray(x) + src

    mass = np.array([[c1 + cb + cs, 0.0, -cb],
                     [0.0, c2 + cs, 0.0],
                     [-cb, 0.0, c3 + cb + cs]])
    return want, resid, lambda x: g, mass, [0.0, 0.0, 0.0], {"n1": 0, "n2": 1, "n3": 2}


def biased_follower_tank():
    """States [va, vb, vdrv, iL] (iL from a to b).
    a:   (VS - va)/RB - va/R1 - k3 va^3 - iL
    b:   iL + (vdrv - vb)/RF
    drv: (E(va) - vdrv)/rout + (vb - vdrv)/RF, E = vc + A s tanh((va - vc)/s)
    L:   (va - vb - Rs iL)/L"""
    vs, rb, r1, k3 = 3.0, 1e3, 2.2e3, 1e-3
    c2, lh, rs, cc, c1, rf, cs = 10e-9, 2.2e-3, 3.0, 1e-9, 47e-9, 1e3, 1e-12
    gain, swing, center, rout = 0.9, 0.8, 0.5, 220.0
    want = {"stray": cs, ("VS", "value"): vs, ("RB", "value"): rb,
            ("R1", "value"): r1, ("G1", "coeffs"): [0.0, 0.0, 0.0, k3],
            ("C2", "value"): c2, ("L1", "value"): lh, ("L1", "series"): rs,
            ("CC", "value"): cc, ("C1", "value"): c1, ("RF", "value"): rf,
            ("A1", "gain"): gain, ("A1", "swing"): swing, ("A1", "center"): center,
            ("A1", "rout"): rout}

    def emf(va):
        return center + gain * swing * math.tanh((va - center) / swing)

    def resid(x):
        va, vb, vd, il = x
        return [(vs - va) / rb - va / r1 - k3 * va ** 3 - il,
                il + (vd - vb) / rf,
                (emf(va) - vd) / rout + (vb - vd) / rf,
                (va - vb - rs * il) / lh]

    def jac(x):
        va = x[0]
        de = gain * (1.0 - math.tanh((va - center) / swing) ** 2)
        return np.array([
            [-1 / rb - 1 / r1 - 3 * k3 * va ** 2, 0.0, 0.0, -1.0],
            [0.0, -1 / rf, 1 / rf, 1.0],
            [de / rout, 1 / rf, -1 / rout - 1 / rf, 0.0],
            [1 / lh, -1 / lh, 0.0, -rs / lh]])

    mass = np.array([[c2 + cc + cs, -cc, 0.0, 0.0],
                     [-cc, c1 + cc + cs, 0.0, 0.0],
                     [0.0, 0.0, cs, 0.0],
                     [0.0, 0.0, 0.0, 1.0]])
    return want, resid, jac, mass, [1.0, 1.0, 1.0, 0.0], {"a": 0, "b": 1, "drv": 2}


CIRCUITS = [("vdp_lossy_tank.yaml", vdp_lossy_tank),
            ("rc_ladder_bridged.yaml", rc_ladder_bridged),
            ("biased_follower_tank.yaml", biased_follower_tank)]

# ---- comparison -----------------------------------------------------------------


def reference(model):
    want, resid, jac, mass, guess, nodes = model()
    x = scipy.optimize.fsolve(resid, guess, fprime=jac, xtol=1e-14, full_output=True)
    x, info, ier, msg = x
    if ier != 1 and max(abs(v) for v in resid(x)) > 1e-12:
        raise RuntimeError("reference operating point failed: " + msg)
    jmat = np.linalg.solve(mass, jac(x))
    ev = scipy.linalg.eig(jmat, right=False)
    return want, x, ev, nodes


def match_poles(got, ref):
    """Greedy nearest matching; returns a list of (got, ref, error, tolerance)."""
    scale = max(abs(z) for z in ref)
    left = list(ref)
    pairs = []
    for z in got:
        k = min(range(len(left)), key=lambda j: abs(left[j] - z))
        r = left.pop(k)
        pairs.append((z, r, abs(z - r), 1e-6 * abs(r) + 1e-12 * scale))
    return pairs


def check_circuit(ringup, srcdir, fname, model):
    path = "%s/tests/data/smallsig/%s" % (srcdir, fname)
    print("== %s" % fname)
    want, x, ref, nodes = reference(model)
    bad = check_values(path, dict(want))
    for b in bad:
        print("  FAIL file and model differ: %s" % b)
    proc = subprocess.run([ringup, "poles", path, "--json"], capture_output=True,
                          text=True, timeout=60)
    if proc.returncode != 0:
        print("  FAIL ringup poles exited %d: %s" % (proc.returncode,
                                                     proc.stderr.strip()[:300]))
        return False
    try:
        out = json.loads(proc.stdout)
    except json.JSONDecodeError:
        print("  FAIL `ringup poles --json` printed no JSON: %r" % proc.stdout[:200])
        return False
    got = [complex(p["re_per_s"], p["im_rad_per_s"]) for p in out["poles"]]
    ok = not bad
    if len(got) != len(ref):
        print("  FAIL %d poles from ringup, %d in the reference" % (len(got), len(ref)))
        return False
    for z, r, e, tol in match_poles(got, ref):
        flag = "ok  " if e <= tol else "FAIL"
        ok = ok and e <= tol
        print("  %s ringup %+.9e %+.9ej  scipy %+.9e %+.9ej  |diff| %.2e (tol %.2e)"
              % (flag, z.real, z.imag, r.real, r.imag, e, tol))
    for a, b in zip(got, got[1:]):
        if a.real < b.real:
            print("  FAIL poles not sorted by real part, largest first")
            ok = False
    ok = check_dominant(out.get("dominant"), ref) and ok
    ok = check_oppoint(out.get("operating_point_v"), x, nodes) and ok
    return ok


def check_dominant(dom, ref):
    cplx = [z for z in ref if z.imag > 0]
    if not cplx:
        empty = dom is None or all(v is None for v in dom.values())
        print("  %s no complex pole; dominant = %r" % ("ok  " if empty else "FAIL", dom))
        return empty
    z = max(cplx, key=lambda w: w.real)
    if dom is None:
        print("  FAIL dominant missing")
        return False
    g, f = dom["growth_rate_per_s"], dom["frequency_hz"]
    fz = z.imag / (2 * math.pi)
    ok = abs(g - z.real) <= 1e-6 * abs(z) and abs(f - fz) <= 1e-6 * abs(fz)
    print("  %s dominant growth %.9e /s (scipy %.9e), frequency %.9e Hz (scipy %.9e)"
          % ("ok  " if ok else "FAIL", g, z.real, f, fz))
    return ok


def check_oppoint(op, x, nodes):
    if op is None:
        print("  (no operating_point_v in the output; not compared)")
        return True
    ok = True
    for name, k in nodes.items():
        v = op.get(name)
        good = v is not None and abs(v - x[k]) <= 1e-9 + 1e-6 * abs(x[k])
        ok = ok and good
        print("  %s operating point %s = %r V (scipy %.12g)"
              % ("ok  " if good else "FAIL", name, v, x[k]))
    return ok


def main():
    if len(sys.argv) != 3:
        print(__doc__)
        return 2
    ringup, srcdir = sys.argv[1], sys.argv[2]
    results = [check_circuit(ringup, srcdir, f, m) for f, m in CIRCUITS]
    print("ref_poles: %d of %d circuits match" % (sum(results), len(results)))
    return 0 if all(results) else 1


if __name__ == "__main__":
    sys.exit(main())
