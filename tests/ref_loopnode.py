#!/usr/bin/python3
"""ref_loopnode.py: the loop gain broken at a node (`ringup poles FILE --loop-node
NODE [--loop-load PARTS] --json`) against an independent numpy model of the same
double injection.

Usage: /usr/bin/python3 tests/ref_loopnode.py <ringup-binary> <source-dir>

The circuit tests/data/loopnode/loaded_colpitts.yaml is written out here by hand as
complex nodal admittances (own derivation: the coil with its series resistance is
1/(Rs + jwL), the follower a Thevenin source g v(a) behind rout, a 1 pF stray on
each original node). For each break the node is split into a driver side and a
load side and L(jw) is computed two ways:
  1. Middlebrook's double injection (R. D. Middlebrook, Int. J. Electronics 38
     (1975) 485-512): a series voltage injection gives T_v = -v_driver/v_load, a
     shunt current injection T_i = -i_driver/i_load, and
     T = (T_v T_i - 1)/(T_v + T_i + 2), L = -T;
  2. the two-port form of the same (ports X = load side, Y = driver side, the
     sides apart, the other node eliminated by Kron reduction):
     L = (Y12 - Y21)/(Y11 + 2 Y12 + Y22).
The two must agree to 1e-9 at every frequency of a grid (they are the same
quantity; only rounding differs). The zero-phase crossing with the largest |L| is
then found with scipy.optimize.brentq on Im L and compared with ringup's
crossover_hz and gain_at_crossover: 1e-6 relative (ringup bisects the crossing to
1e-13 and prints 7 or more digits; the two models round differently at ~1e-12).
Part values are read back from the YAML file so the model cannot drift from it.
Exit 0 only when every check passes.
"""
import json
import math
import os
import subprocess
import sys

import numpy as np
import scipy.optimize
import yaml

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from refutil import si  # noqa: E402

BREAKS = [("t", "C1"), ("a", None), ("a", "C1"), ("t", "C1,C2")]


def parts_of(path):
    with open(path, encoding="utf-8") as fh:
        doc = yaml.safe_load(fh)
    p = doc["parts"]
    return {
        "stray": si(doc["stray"]),
        "g": si(p["A1"]["gain"]), "rout": si(p["A1"]["rout"]),
        "L": si(p["L1"]["value"]), "rs": si(p["L1"]["series"]),
        "C1": si(p["C1"]["value"]), "C2": si(p["C2"]["value"]),
        "RL": si(p["RL"]["value"]), "RA": si(p["RA"]["value"]),
    }


def two_terminal(v, w):
    """(name, node a, node b, admittance at w) of every passive part."""
    return [("L1", "a", "gnd", 1.0 / (v["rs"] + 1j * w * v["L"])),
            ("C1", "a", "t", 1j * w * v["C1"]),
            ("C2", "t", "gnd", 1j * w * v["C2"]),
            ("RL", "t", "gnd", 1.0 / v["RL"]),
            ("RA", "a", "gnd", 1.0 / v["RA"])]


def split_network(v, w, at, load):
    """Nodal admittance matrix of the circuit with node `at` split into at (driver)
    and at' (load). Unknowns: v(a), v(t), v(at'). Current into a node from outside
    = Y v. The follower's input (A1 in, a control input) is on the load side when
    `load` is None and at == 'a'."""
    idx = {"a": 0, "t": 1, "x": 2}
    loads = set(load.split(",")) if load else set()

    def where(part, node, control=False):
        if node != at:
            return node
        on_load = (part in loads) if load else control
        return "x" if on_load else node

    Y = np.zeros((3, 3), dtype=complex)
    for name, na, nb, y in two_terminal(v, w):
        na, nb = where(name, na), where(name, nb)
        for p, q, s in ((na, na, 1), (nb, nb, 1), (na, nb, -1), (nb, na, -1)):
            if p != "gnd" and q != "gnd":
                Y[idx[p], idx[q]] += s * y
    # Follower: i into its out = (g v(in) - v(out))/rout, so the node's Y gets
    # +1/rout on v(out) and -g/rout on v(in).
    n_in, n_out = where("A1", "a", control=True), where("A1", "t")
    Y[idx[n_out], idx[n_out]] += 1.0 / v["rout"]
    Y[idx[n_out], idx[n_in]] -= v["g"] / v["rout"]
    for node in ("a", "t"):  # strays on the original nodes only
        Y[idx[node], idx[node]] += 1j * w * v["stray"]
    return Y, idx[at], idx["x"]


def loop_injection(v, f, at, load):
    w = 2 * math.pi * f
    Y, kd, kl = split_network(v, w, at, load)
    K = np.zeros((4, 4), dtype=complex)
    K[:3, :3] = Y
    K[kd, 3] += 1.0   # probe current leaves the driver node ...
    K[kl, 3] -= 1.0   # ... and enters the load node
    K[3, kl], K[3, kd] = 1.0, -1.0  # v(load) - v(driver) = v_z
    sol_v = np.linalg.solve(K, np.array([0, 0, 0, 1.0], dtype=complex))
    rhs = np.zeros(4, dtype=complex)
    rhs[kd] = 1.0
    sol_i = np.linalg.solve(K, rhs)
    tv = -sol_v[kd] / sol_v[kl]
    ip = sol_i[3]
    if ip == 0:  # the load side draws nothing (an amplifier input): T_i -> inf, T = T_v
        return -tv
    ti = -(ip - 1.0) / ip
    t = (tv * ti - 1.0) / (tv + ti + 2.0)
    return -t


def loop_two_port(v, f, at, load):
    w = 2 * math.pi * f
    Y, kd, kl = split_network(v, w, at, load)
    # Kron reduction onto the ports (X = load first, Y = driver), the other node
    # eliminated: Yp = Y_pp - Y_pi Y_ii^-1 Y_ip.
    ports = [kl, kd]
    inner = [k for k in range(3) if k not in ports]
    ypp = Y[np.ix_(ports, ports)]
    yp = ypp - Y[np.ix_(ports, inner)] @ np.linalg.solve(Y[np.ix_(inner, inner)],
                                                          Y[np.ix_(inner, ports)])
    return (yp[0, 1] - yp[1, 0]) / (yp[0, 0] + 2 * yp[0, 1] + yp[1, 1])


def crossing(v, at, load, f0):
    fs = f0 * np.logspace(math.log10(1 / 30), math.log10(30), 600)
    L = [loop_injection(v, f, at, load) for f in fs]
    best = None
    for k in range(1, len(fs)):
        if L[k - 1].imag * L[k].imag < 0 and (L[k - 1].real > 0 or L[k].real > 0):
            fx = scipy.optimize.brentq(
                lambda f: loop_injection(v, f, at, load).imag, fs[k - 1], fs[k],
                xtol=1e-14 * fs[k], rtol=1e-15)
            g = abs(loop_injection(v, fx, at, load))
            if loop_injection(v, fx, at, load).real > 0 and (best is None or g > best[1]):
                best = (fx, g)
    return best


def main():
    exe, src = sys.argv[1], sys.argv[2]
    path = os.path.join(src, "tests", "data", "loopnode", "loaded_colpitts.yaml")
    v = parts_of(path)
    f0 = 1 / (2 * math.pi * math.sqrt(v["L"] * v["C1"] * v["C2"] / (v["C1"] + v["C2"])))
    bad = 0
    for at, load in BREAKS:
        for f in f0 * np.logspace(-1, 1, 9):
            a, b = loop_injection(v, f, at, load), loop_two_port(v, f, at, load)
            if abs(a - b) > 1e-9 * abs(b):
                print("FAIL %s/%s at %g Hz: injection %r, two-port %r" % (at, load, f, a, b))
                bad += 1
        want = crossing(v, at, load, f0)
        cmd = [exe, "poles", path, "--loop-node", at, "--json"]
        if load:
            cmd += ["--loop-load", load]
        out = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if out.returncode != 0:
            print("FAIL %s: exit %d: %s" % (" ".join(cmd), out.returncode, out.stderr))
            bad += 1
            continue
        got = json.loads(out.stdout)["loop"]
        fx, gx = got["crossover_hz"], got["gain_at_crossover"]
        ok = (want is not None and abs(fx - want[0]) <= 1e-6 * want[0]
              and abs(gx - want[1]) <= 1e-6 * want[1])
        print("%s break at %s (load %s): ringup %.9g Hz |L| %.9g, numpy %s"
              % ("ok  " if ok else "FAIL", at, load or "inputs", fx, gx,
                 "%.9g Hz |L| %.9g" % want if want else "no crossing"))
        bad += 0 if ok else 1
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
