#!/usr/bin/env python3
"""golden_json.py: the JSON of every bundled example against a stored copy.

A regression guard for refactoring: `check`, `run` and `poles` of each file in
examples/ are run with --json and compared with tests/golden/NAME.COMMAND.json,
key by key. Machine times (any key ending in `wall_s` or `cpu_s`) are ignored; numbers
must agree to 1e-9 relative (1e-15 absolute near zero), which is far tighter than
any figure the tool prints and loose enough for the last bit of libm between
machines. The stored copies are the program's own earlier output, so this
checks that behaviour did not move, not that it is right: every figure's
correctness is checked against outside references by the other tests.

Usage: golden_json.py RINGUP SOURCE_DIR [--update]
  --update rewrites the stored copies (do it only in a commit that says which
  behaviour changed and why).
"""
import json
import math
import os
import subprocess
import sys

COMMANDS = ("check", "run", "poles")
REL_TOL = 1e-9
ABS_TOL = 1e-15


def run_json(ringup, cmd, path):
    p = subprocess.run([ringup, cmd, path, "--json"], capture_output=True,
                       text=True, timeout=600)
    if p.returncode not in (0,):
        return {"exit_status": p.returncode, "stderr": p.stderr.strip()}
    return json.loads(p.stdout)


def compare(a, b, where, diffs):
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            if k.endswith(("wall_s", "cpu_s")):
                continue
            if k not in a or k not in b:
                diffs.append("%s.%s: only in %s" % (where, k,
                                                    "stored" if k in a else "new"))
                continue
            compare(a[k], b[k], where + "." + k, diffs)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            diffs.append("%s: %d items stored, %d now" % (where, len(a), len(b)))
            return
        for i, (x, y) in enumerate(zip(a, b)):
            compare(x, y, "%s[%d]" % (where, i), diffs)
    elif (isinstance(a, (int, float)) and isinstance(b, (int, float))
          and not isinstance(a, bool) and not isinstance(b, bool)):
        if not math.isclose(a, b, rel_tol=REL_TOL, abs_tol=ABS_TOL):
            diffs.append("%s: stored %r, now %r" % (where, a, b))
    elif a != b:
        diffs.append("%s: stored %r, now %r" % (where, a, b))


def main():
    ringup, src = sys.argv[1], sys.argv[2]
    update = "--update" in sys.argv[3:]
    examples = sorted(f for f in os.listdir(os.path.join(src, "examples"))
                      if f.endswith(".yaml"))
    golden = os.path.join(src, "tests", "golden")
    os.makedirs(golden, exist_ok=True)
    failures = 0
    for ex in examples:
        path = os.path.join(src, "examples", ex)
        for cmd in COMMANDS:
            now = run_json(ringup, cmd, path)
            # The file name is the caller's spelling of the path: keep it relative.
            if isinstance(now, dict) and "file" in now:
                now["file"] = os.path.relpath(now["file"], src)
            if isinstance(now, dict) and "stderr" in now:
                now["stderr"] = now["stderr"].replace(src + "/", "")
            name = os.path.join(golden, "%s.%s.json" % (ex[:-5], cmd))
            if update or not os.path.exists(name):
                with open(name + ".tmp", "w") as f:
                    json.dump(now, f, indent=1, sort_keys=True)
                    f.write("\n")
                os.replace(name + ".tmp", name)
                print("stored %s" % os.path.relpath(name, src))
                continue
            with open(name) as f:
                stored = json.load(f)
            diffs = []
            compare(stored, now, "%s %s" % (cmd, ex), diffs)
            if diffs:
                failures += 1
                print("MOVED: %s %s" % (cmd, ex))
                for d in diffs[:20]:
                    print("  " + d)
            else:
                print("same: %s %s" % (cmd, ex))
    if failures:
        print("%d outputs differ from tests/golden (rerun with --update only when "
              "the change is intended)" % failures)
        sys.exit(1)


if __name__ == "__main__":
    main()
