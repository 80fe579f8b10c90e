#!/usr/bin/python3
"""ref_transient.py: transients of linear networks from `ringup run FILE --out DIR`
(DIR/wave.csv) against the matrix-exponential solution built here by hand with
numpy/scipy.

Usage: /usr/bin/python3 tests/ref_transient.py <ringup-binary> <source-dir>

For each circuit in tests/data/transient/ this script writes its own node
equations (own derivation, below): states x are the free node voltages and the
inductor currents (i(L) from the inductor's first node to its second), and

    M x' = K x + b_r vs(t) + b_c vs'(t)

with M = blockdiag(C, I), C holding the capacitors and the stray capacitance from
every free node to ground, K the conductances and inductor rows, b_r the resistive
and b_c the capacitive coupling of the supply voltage vs into the free nodes.
A = M^{-1} K is the state matrix.

Reference (linear ODE theory, variation of constants; e.g. Moler and Van Loan,
"Nineteen dubious ways to compute the exponential of a matrix, twenty-five years
later", SIAM Review 45 (2003), for expm and for the augmented-matrix form of the
forced response):
  (1) zero-input response   x(t) = expm(A t) x0
  (2) step at t = 0         x(t) = x_ss + expm(A t) (x0 - x_ss), x_ss = -K^{-1} b_r V,
      x0 = M^{-1} b_c V: integrating M x' = ... across the jump, only the
      capacitive term b_c vs' carries an impulse, so the charge M x jumps by b_c V
      (the charge-conserving share of the supply through the capacitors to it).
  (3) linear rise over T    x' = A x + g1 t + g0 with g1 = M^{-1} b_r V/T,
      g0 = M^{-1} b_c V/T, x(0) = 0; with z = [x, t, 1], z' = Z z and
      x(t) = [expm(Z t) e_1]_x for t <= T, then (2) from x(T) on (no jump at T).

Every output sample is compared. Pass when, for every node-voltage column, the
largest |ringup - reference| is below 1e-6 of the largest |voltage| of the
reference (all node columns), and for the inductor current below 1e-6 of its
current scale: the larger of its largest |current| and Vpeak sqrt(C_total/L),
the current an LC tank of that inductor and all the circuit's capacitance
(capacitors plus strays) carries at the voltage peak. That is the scale the
engine's tolerances are stated in (src/system/system.c, ru_system_state_scale); a
current far below it (the ramp case: peak 0.96 mA, scale 19 mA) is held to 1e-6
of that scale, not of its own peak.

Tolerance justification: the engine's NORMAL accuracy keeps the local error per
step within rtol 1e-8 and atol 1e-10 of the state scale; over ~1e3 steps the
global error of a damped linear system grows to some 10..100 times that (common
practice for BDF codes), 1e-7..1e-6. Measured: 0.2..3.4e-7 of the peak, falling
about 100x with `--accuracy precise` (to ~5e-9), so what is left is solver
error, not a model difference. The CSV keeps 10 significant digits (5e-10
relative) and times 12 (a time error of 5e-13 relative moves a sample by
|x'| dt <= omega t 5e-13 of the peak, < 1e-9 here). 1e-6 of the peak is 3x or
more above the measured error and far below a wrong model (one capacitor 1 %
off gives ~6e-3 of the peak; leaving out the 1 pF stray gives ~9e-5;
`--accuracy draft` gives ~5e-4).
Part values are read back from the YAML file and compared with the constants
used here, so the two cannot drift apart silently. The driven node's column
(vcc) is compared with the supply waveform, and the number of rows and the end
time with stop/sample. Exit 0 only when every check passes.
"""
import csv
import os
import subprocess
import sys
import tempfile

import numpy as np
import scipy.linalg
import yaml

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from refutil import si  # noqa: E402  (shared with the other reference checks)

RTOL_PEAK = 1e-6   # max error / peak of the signal (justified in the docstring)


def check_values(doc, want):
    """Every (part, key) -> value in `want` must equal the file's value; the
    top-level `stray` (default 1p per the circuit format) and run keys too."""
    bad = []
    same = lambda a, b: abs(a - b) <= 1e-12 * max(abs(a), abs(b))
    for key, val in want.items():
        if key == "stray":
            got = si(doc.get("stray", "1p"))
        elif key[0] == "run":
            got = si(doc["run"][key[1]])
        else:
            got = si(doc["parts"][key[0]].get(key[1], 0))
        if not same(got, val):
            bad.append("%s: file %r, model %r" % (key, got, val))
    return bad


# ---- circuit models (own derivation) -------------------------------------------

def rlc_bridged_preset():
    """States [va, vb, vc, iL], iL from a to b; no source; preset va = 1 V.
    a: (C1+CB+cs) va' - CB vc' = -va/R1 - iL
    b: (C2+cs) vb'             = iL - (vb - vc)/R2
    c: (C3+CB+cs) vc' - CB va' = (vb - vc)/R2
    L: iL' = (va - vb - Rs iL)/L"""
    r1, c1, cb, lh, rs, c2, r2, c3 = 47e3, 22e-9, 1e-9, 4.7e-3, 12.0, 33e-9, 1.5e3, 10e-9
    cs, stop, sample = 1e-12, 300e-6, 0.5e-6
    want = {"stray": cs, ("R1", "value"): r1, ("C1", "value"): c1,
            ("CB", "value"): cb, ("L1", "value"): lh, ("L1", "series"): rs,
            ("C2", "value"): c2, ("R2", "value"): r2, ("C3", "value"): c3,
            ("run", "stop"): stop, ("run", "sample"): sample}
    mass = np.array([[c1 + cb + cs, 0.0, -cb, 0.0],
                     [0.0, c2 + cs, 0.0, 0.0],
                     [-cb, 0.0, c3 + cb + cs, 0.0],
                     [0.0, 0.0, 0.0, 1.0]])
    k = np.array([[-1 / r1, 0.0, 0.0, -1.0],
                  [0.0, -1 / r2, 1 / r2, 1.0],
                  [0.0, 1 / r2, -1 / r2, 0.0],
                  [1 / lh, -1 / lh, 0.0, -rs / lh]])
    amat = np.linalg.solve(mass, k)
    x0 = np.array([1.0, 0.0, 0.0, 0.0])

    def ref(t):
        return scipy.linalg.expm(amat * t) @ x0

    cols = {"a": 0, "b": 1, "c": 2, "i(L1)": 3}
    ctot = {"i(L1)": c1 + cb + c2 + c3 + 3 * cs, "L(L1)": lh}
    return want, ref, cols, {}, ctot, stop, sample


def coupled_network(rise):
    """States [v1, v2, v3, iL], iL from n2 to n3; supply vs on vcc.
    n1: (C1+cs) v1'           = (vs - v1)/R1 + (v2 - v1)/R2
    n2: (CS+cs) v2' - CS vs'  = (v1 - v2)/R2 - iL
    n3: (C3+cs) v3'           = iL - v3/R3
    L:  iL' = (v2 - v3 - Rs iL)/L"""
    vs, r1, c1, ccs, r2, lh, rs = 6.0, 2.2e3, 10e-9, 4.7e-9, 3.3e3, 2.2e-3, 8.0
    c3, r3, cs, stop, sample = 15e-9, 10e3, 2e-12, 400e-6, 0.5e-6
    want = {"stray": cs, ("VS", "value"): vs, ("VS", "rise"): rise,
            ("R1", "value"): r1, ("C1", "value"): c1, ("CS", "value"): ccs,
            ("R2", "value"): r2, ("L1", "value"): lh, ("L1", "series"): rs,
            ("C3", "value"): c3, ("R3", "value"): r3,
            ("run", "stop"): stop, ("run", "sample"): sample}
    mass = np.diag([c1 + cs, ccs + cs, c3 + cs, 1.0])
    k = np.array([[-1 / r1 - 1 / r2, 1 / r2, 0.0, 0.0],
                  [1 / r2, -1 / r2, 0.0, -1.0],
                  [0.0, 0.0, -1 / r3, 1.0],
                  [0.0, 1 / lh, -1 / lh, -rs / lh]])
    b_r = np.array([1 / r1, 0.0, 0.0, 0.0])
    b_c = np.array([0.0, ccs, 0.0, 0.0])
    amat = np.linalg.solve(mass, k)
    x_ss = -np.linalg.solve(k, b_r * vs)

    if rise == 0:
        x0 = np.linalg.solve(mass, b_c * vs)   # charge share of the step

        def ref(t):
            return x_ss + scipy.linalg.expm(amat * t) @ (x0 - x_ss)

        def vsupply(t):
            return vs
    else:
        n = len(x_ss)
        aug = np.zeros((n + 2, n + 2))
        aug[:n, :n] = amat
        aug[:n, n] = np.linalg.solve(mass, b_r * vs / rise)       # g1 (times t)
        aug[:n, n + 1] = np.linalg.solve(mass, b_c * vs / rise)   # g0 (times 1)
        aug[n, n + 1] = 1.0                                        # t' = 1
        z0 = np.zeros(n + 2)
        z0[n + 1] = 1.0

        def ramp(t):
            return (scipy.linalg.expm(aug * t) @ z0)[:n]

        x_end = ramp(rise)

        def ref(t):
            if t <= rise:
                return ramp(t)
            return x_ss + scipy.linalg.expm(amat * (t - rise)) @ (x_end - x_ss)

        def vsupply(t):
            return vs * min(t / rise, 1.0)

    cols = {"n1": 0, "n2": 1, "n3": 2, "i(L1)": 3}
    ctot = {"i(L1)": c1 + ccs + c3 + 3 * cs, "L(L1)": lh}
    return want, ref, cols, {"vcc": vsupply}, ctot, stop, sample


CIRCUITS = [("rlc_bridged_preset.yaml", "zero-input, preset a = 1 V", rlc_bridged_preset),
            ("supply_step_coupled.yaml", "6 V step at t = 0",
             lambda: coupled_network(0.0)),
            ("supply_ramp_coupled.yaml", "6 V linear rise over 40 us",
             lambda: coupled_network(40e-6))]

# ---- comparison -----------------------------------------------------------------


def read_wave(path):
    """Header and float rows of wave.csv, or (None, message)."""
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(fh))
    except OSError as e:
        return None, "cannot read %s: %s" % (path, e)
    if len(rows) < 2 or not rows[0] or rows[0][0] != "time_s":
        return None, "%s has no header `time_s,...` and data rows" % path
    try:
        data = np.array([[float(v) for v in r] for r in rows[1:]])
    except ValueError as e:
        return None, "%s: non-numeric value: %s" % (path, e)
    if data.ndim != 2 or data.shape[1] != len(rows[0]):
        return None, "%s: rows do not match the header" % path
    return (rows[0], data), None


def run_ringup(ringup, path, outdir):
    proc = subprocess.run([ringup, "run", path, "--out", outdir], capture_output=True,
                          text=True, timeout=120)
    if proc.returncode != 0:
        return None, "ringup run exited %d: %s" % (proc.returncode,
                                                  proc.stderr.strip()[:300])
    wave = os.path.join(outdir, "wave.csv")
    if not os.path.isfile(wave):
        return None, "ringup run exited 0 but wrote no %s (stdout: %r)" % (
            wave, proc.stdout.strip()[:200])
    return read_wave(wave)


def check_grid(times, stop, sample):
    """Rows at 0, sample, 2 sample, ... up to stop."""
    nexp = int(round(stop / sample)) + 1
    grid = np.arange(nexp) * sample
    ok = len(times) == nexp and np.max(np.abs(times - grid)) <= 1e-9 * sample
    print("  %s %d rows from t = %.6g to %.6g s (expected %d rows, 0 .. %.6g s step %.6g)"
          % ("ok  " if ok else "FAIL", len(times), times[0], times[-1], nexp, stop,
             sample))
    return ok


def compare(header, data, ref, cols, driven, tank):
    """Per-column max |error| against the reference at every sample. tank maps
    "i(L)" to the circuit's total capacitance and "L(L)" to the inductance."""
    idx = {name: j for j, name in enumerate(header)}
    missing = [c for c in list(cols) + list(driven) if c not in idx]
    if missing:
        print("  FAIL columns %s missing from wave.csv (header %s)" % (missing, header))
        return False
    times = data[:, 0]
    refx = np.array([ref(t) for t in times])
    vnames = [c for c in cols if not c.startswith("i(")]
    vpeak = max(np.max(np.abs(refx[:, cols[c]])) for c in vnames)
    ok = True
    for name, k in cols.items():
        peak = vpeak if name in vnames else np.max(np.abs(refx[:, k]))
        scale = peak
        if name not in vnames:
            lname = "L(" + name[2:]
            scale = max(peak, vpeak * np.sqrt(tank[name] / tank[lname]))
        err = np.abs(data[:, idx[name]] - refx[:, k])
        j = int(np.argmax(err))
        good = bool(peak > 0 and err[j] <= RTOL_PEAK * scale)
        ok = ok and good
        print("  %s %-6s max |err| %.3e at t = %.6g s, peak %.6g, err/peak %.2e, "
              "scale %.4g, err/scale %.2e (tol %.0e)"
              % ("ok  " if good else "FAIL", name, err[j], times[j], peak,
                 err[j] / peak if peak > 0 else float("inf"), scale,
                 err[j] / scale if scale > 0 else float("inf"), RTOL_PEAK))
    for name, fn in driven.items():
        want = np.array([fn(t) for t in times])
        err = np.max(np.abs(data[:, idx[name]] - want))
        peak = np.max(np.abs(want))
        good = bool(err <= 1e-9 * peak)   # only CSV rounding (5e-10 relative)
        ok = ok and good
        print("  %s %-6s (driven) max |err| %.3e against the supply wave, peak %.6g"
              % ("ok  " if good else "FAIL", name, err, peak))
    return ok


def check_circuit(ringup, srcdir, fname, what, model):
    path = os.path.join(srcdir, "tests", "data", "transient", fname)
    print("== %s (%s)" % (fname, what))
    want, ref, cols, driven, tank, stop, sample = model()
    with open(path, encoding="utf-8") as fh:
        bad = check_values(yaml.safe_load(fh), want)
    for b in bad:
        print("  FAIL file and model differ: %s" % b)
    with tempfile.TemporaryDirectory(prefix="ref_transient_") as outdir:
        wave, msg = run_ringup(ringup, path, outdir)
    if wave is None:
        print("  FAIL " + msg)
        return False
    header, data = wave
    ok = check_grid(data[:, 0], stop, sample) and not bad
    return compare(header, data, ref, cols, driven, tank) and ok


def main():
    if len(sys.argv) != 3:
        print(__doc__)
        return 2
    ringup, srcdir = sys.argv[1], sys.argv[2]
    if not (os.path.isfile(ringup) and os.access(ringup, os.X_OK)):
        print("ref_transient: FAIL ringup binary %r not found or not executable" % ringup)
        return 1
    results = [check_circuit(ringup, srcdir, f, w, m) for f, w, m in CIRCUITS]
    print("ref_transient: %d of %d circuits match" % (sum(results), len(results)))
    return 0 if all(results) else 1


if __name__ == "__main__":
    sys.exit(main())
