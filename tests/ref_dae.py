#!/usr/bin/python3
"""ref_dae.py: a network with ideal nodes (`stray: 0`, run by the IDA engine) from
`ringup run FILE --out DIR` (DIR/wave.csv) against scipy's solve_ivp of the
circuit's equations reduced by hand to an ODE.

Usage: /usr/bin/python3 tests/ref_dae.py <ringup-binary> <source-dir>

Circuit tests/data/dae/ideal-group.yaml: VS (step 0 -> 1 V at t1) - R1 - a,
C1 from a to b, R2 from b to m, R3 from m to ground, R4 from m to t, C2 (plus
its own 2 pF stray) from t to ground; no other capacitance, so m is algebraic
and a, b have only C1 between them. Own derivation (KCL): one current i flows
through R1, C1 and R2 (a and b have nothing else), so with q = v(a) - v(b):
    v(a) = vs - R1 i,  v(b) = v(m) + R2 i,  q = vs - (R1 + R2) i - v(m)
    KCL at m: i = v(m)/R3 + (v(m) - v(t))/R4, so v(m) = (i + v(t)/R4)/G, G = 1/R3 + 1/R4
    => i = (vs - q - v(t)/(R4 G)) / (R1 + R2 + 1/G)
    C1 q' = i,   C2' v(t)' = (v(m) - v(t))/R4,   C2' = C2 + 2 pF.
q and v(t) are continuous at the step (no capacitor touches the supply), so
v(a), v(b), v(m) jump there and the ODE restarts from the same q, v(t).
Reference: scipy.integrate.solve_ivp (Radau, rtol 1e-11, atol 1e-15) of that
ODE, evaluated at the sample times (its dense output), on both sides of t1.

Every sample of a, b, m and t is compared: pass when the largest error is below
1e-6 V (the peak is about 0.8 V). Tolerance: as tests/ref_transient.py states
for the CVODE engine (global error 1e-7..1e-6 of the peak at NORMAL); a model
error such as the 2 pF left out moves v(t) by 1.1e-5 V (measured), a wrong
common level of a, b moves v(a) by volts. The run must say it used IDA.
"""
import csv
import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import yaml
from scipy.integrate import solve_ivp

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from refutil import si  # noqa: E402

TOL_V = 1e-6


def main():
    ringup, src = sys.argv[1], sys.argv[2]
    path = os.path.join(src, "tests", "data", "dae", "ideal-group.yaml")
    with open(path) as f:
        doc = yaml.safe_load(f)
    p = {k: si(v["value"]) for k, v in doc["parts"].items() if "value" in v}
    R1, R2, R3, R4, C1 = p["R1"], p["R2"], p["R3"], p["R4"], p["C1"]
    C2 = p["C2"] + si(doc["stray"]["nodes"]["t"])
    V, t1 = si(doc["parts"]["VS"]["to"]), si(doc["parts"]["VS"]["at"])
    G = 1 / R3 + 1 / R4

    def algebraic(vs, q, vt):
        i = (vs - q - vt / (R4 * G)) / (R1 + R2 + 1 / G)
        vm = (i + vt / R4) / G
        return i, vm, vs - R1 * i, vm + R2 * i

    def rhs(vs):
        def f(_t, y):
            i, vm, _, _ = algebraic(vs, y[0], y[1])
            return [i / C1, (vm - y[1]) / (R4 * C2)]
        return f

    with tempfile.TemporaryDirectory() as out:
        r = subprocess.run([ringup, "run", path, "--out", out, "--json"],
                           capture_output=True, text=True, timeout=300)
        if r.returncode != 0:
            print("ringup failed:", r.stderr)
            return 1
        engine = json.loads(r.stdout)["solver"]["engine"]
        with open(os.path.join(out, "wave.csv")) as f:
            rows = list(csv.DictReader(f))
    t = np.array([float(row["time_s"]) for row in rows])
    got = {n: np.array([float(row[n]) for row in rows]) for n in ("a", "b", "m", "t")}
    before, after = t < t1 - 1e-12, t >= t1 - 1e-12
    want = {n: np.zeros_like(t) for n in got}
    sol = solve_ivp(rhs(V), (t1, t[-1]), [0.0, 0.0], method="Radau", rtol=1e-11,
                    atol=1e-15, dense_output=True)
    y = sol.sol(t[after])
    i, vm, va, vb = algebraic(V, y[0], y[1])
    want["a"][after], want["b"][after], want["m"][after], want["t"][after] = va, vb, vm, y[1]
    ok = engine.startswith("IDA")
    print("engine: %s" % engine)
    for n in got:
        err = np.max(np.abs(got[n] - want[n]))
        print("%s: max |error| %.3g V (peak %.3g V), before the step max |v| %.3g V"
              % (n, err, np.max(np.abs(want[n])), np.max(np.abs(got[n][before]))))
        ok = ok and err < TOL_V
    print("PASS" if ok else "FAIL")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
