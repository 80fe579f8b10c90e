#!/usr/bin/env python3
"""accuracy_table.py: how close the predictions come, on the examples.

Runs `ringup run FILE --json` on every examples/*.yaml, the start-up corpus
(tests/data/startup/*.yaml), the circuits kept for this table
(tests/data/accuracy/*.yaml) and the rail-clipping Wien bridge of the Monte Carlo
tests, and compares each run's
predictions with what the same run measured: start-up time (the integral of
dA / (A sigma(A)) from the predicted start level), settled amplitude, frequency and
THD (the harmonic balance). Prints the table as Markdown; the README carries it
between the markers below, and this script is the only way it is written:

  accuracy_table.py RINGUP SOURCE_DIR           check (a ctest entry)
  accuracy_table.py RINGUP SOURCE_DIR --update  rewrite the README's table

The check fails when
  - the README's table is not what the program gives now (figures are compared as
    printed, to the digits shown), or
  - on a clean start-up the predicted start-up time is more than 3 % off the
    measured one (the target of the prediction, common practice for a designer's
    margin on start-up time). A start-up is clean when the run started, the
    prediction was made, and the run's own self-check found the measured growth
    consistent with the predicted start level (no note that "the measured growth
    extrapolates back" elsewhere: a large-signal bias transient, not the dominant
    mode's small-signal growth, then sets the start); or
  - on a run that settled, the harmonic balance (when it converged) is more than
    2 % off the measured settled amplitude or 0.1 % off its frequency (the targets
    a designer's table of a tone needs; common practice), or
  - fewer than two examples have a clean start-up (the check must check something).
The measured figures are the run's own (its transient at the file's accuracy), so
the table says how well the quick prediction stands for the simulation.
"""
import glob
import json
import os
import subprocess
import sys

import yaml

BEGIN = "<!-- accuracy table: tests/accuracy_table.py --update -->"
END = "<!-- end of accuracy table -->"
UNCLEAN = "the measured growth extrapolates back"
STARTUP_LIMIT = 0.03
AMPLITUDE_LIMIT = 0.02
FREQUENCY_LIMIT = 0.001


def run(ringup, src, path):
    p = subprocess.run([ringup, "run", path, "--json"], cwd=src, capture_output=True,
                       text=True, timeout=600)
    if p.returncode != 0:
        raise RuntimeError("%s: exit %d: %s" % (path, p.returncode, p.stderr.strip()))
    return json.loads(p.stdout)


def num(x):
    return isinstance(x, (int, float)) and x == x


def si(x, unit):
    """x with an SI prefix, 4 significant digits."""
    if not num(x):
        return "-"
    for scale, pre in ((1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u")):
        if abs(x) >= scale:
            return "%.4g %s%s" % (x / scale, pre, unit)
    return "%.4g n%s" % (x / 1e-9, unit)


def err(pred, meas):
    if not (num(pred) and num(meas)) or meas == 0:
        return "-"
    return "%+.3f %%" % (100.0 * (pred / meas - 1.0))


def row(name, title, d):
    p = d.get("predicted") or {}
    hb = p.get("harmonic_balance") or {}
    hb = hb if hb.get("converged") else {}
    notes = d.get("notes") or []
    t_m, t_p = d.get("startup_time_s"), p.get("startup_time_s")
    clean = bool(d.get("started")) and num(t_p) and num(t_m) and not any(
        UNCLEAN in n for n in notes)
    if not d.get("started"):
        why = "did not start"
    elif not num(t_p):
        why = "no start-up prediction (the run says why)"
    elif not clean:
        why = "not clean: a bias transient sets the start"
    else:
        why = "clean"
    cells = ["%s (`%s`)" % (title, name), p.get("start_level_kind") or "-",
             si(t_m, "s"), si(t_p, "s"), err(t_p, t_m),
             si(d.get("settled_amplitude_v"), "V"), si(hb.get("settled_amplitude_v"), "V"),
             err(hb.get("settled_amplitude_v"), d.get("settled_amplitude_v")),
             si(d.get("frequency_hz"), "Hz"), si(hb.get("frequency_hz"), "Hz"),
             err(hb.get("frequency_hz"), d.get("frequency_hz")),
             "%.3g %%" % d["thd_percent"] if num(d.get("thd_percent")) else "-",
             "%.3g %%" % hb["thd_percent"] if num(hb.get("thd_percent")) else "-",
             why]
    off = (t_p / t_m - 1.0) if clean else None
    tone = []
    if d.get("settled") and hb:
        for key, lim, what in (("settled_amplitude_v", AMPLITUDE_LIMIT, "amplitude"),
                               ("frequency_hz", FREQUENCY_LIMIT, "frequency")):
            if num(hb.get(key)) and num(d.get(key)) and \
                    abs(hb[key] / d[key] - 1.0) > lim:
                tone.append("harmonic balance %s %+.3f %% off the measured (limit %g %%)"
                            % (what, 100 * (hb[key] / d[key] - 1.0), 100 * lim))
    return cells, clean, off, tone


HEAD = ["circuit (file)", "kick", "start-up", "predicted", "off", "amplitude", "predicted",
        "off", "frequency", "predicted", "off", "THD", "predicted", "start-up check"]


def corpus(src):
    files = []
    for sub in ("examples", "tests/data/startup", "tests/data/accuracy"):
        files += sorted(glob.glob(os.path.join(src, sub, "*.yaml")))
    return files + [os.path.join(src, "tests/data/montecarlo/wien-clip.yaml")]


def table(ringup, src):
    lines = ["| " + " | ".join(HEAD) + " |", "|" + "---|" * len(HEAD)]
    clean, bad = 0, []
    for path in corpus(src):
        name = os.path.relpath(path, src)
        with open(path, encoding="utf-8") as fh:
            title = yaml.safe_load(fh).get("title", "")
        cells, ok, off, tone = row(name, title, run(ringup, src, path))
        bad += ["%s: %s" % (name, t) for t in tone]
        lines.append("| " + " | ".join(cells) + " |")
        if ok:
            clean += 1
            if abs(off) > STARTUP_LIMIT:
                bad.append("%s: predicted start-up %+.2f %% off the measured "
                           "(limit 3 %%)" % (name, 100 * off))
    return lines, clean, bad


def main():
    ringup, src = os.path.abspath(sys.argv[1]), sys.argv[2]
    update = "--update" in sys.argv[3:]
    lines, clean, bad = table(ringup, src)
    path = os.path.join(src, "README.md")
    text = open(path, encoding="utf-8").read()
    if BEGIN not in text or END not in text:
        print("README.md has no accuracy table markers")
        return 1
    head, rest = text.split(BEGIN, 1)
    _, tail = rest.split(END, 1)
    new = head + BEGIN + "\n" + "\n".join(lines) + "\n" + END + tail
    print("\n".join(lines))
    fails = 0
    if update:
        tmp = path + ".tmp"
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(new)
        os.replace(tmp, path)
    elif new != text:
        print("FAIL: the README's accuracy table is not what the program gives now; "
              "run tests/accuracy_table.py RINGUP . --update and review the diff")
        fails += 1
    for b in bad:
        print("FAIL: " + b)
        fails += 1
    if clean < 2:
        print("FAIL: only %d examples have a clean start-up to check" % clean)
        fails += 1
    print("%d clean start-ups checked, %d failures" % (clean, fails))
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
