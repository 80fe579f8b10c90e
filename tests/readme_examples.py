#!/usr/bin/env python3
"""readme_examples.py: the terminal examples in README.md are what the tool prints.

Every fenced block whose first line is a command (`$ build/ringup ...` or
`$ ringup ...`) is run from the source folder with the built binary, and the rest
of the block must be its output, line for line. Only times that depend on the
machine are masked: the trailing CPU or wall time of the `solver:`, `Newton:` and `check:`
lines, and numbers below 1e-12 (round-off). A block is a promise to the reader, so a changed figure fails the test until
the README is brought up to date (`--update` rewrites the blocks from the program's
output; review the diff, then commit it with the change that moved the figures).

Usage: readme_examples.py RINGUP SOURCE_DIR [--update]
"""
import os
import re
import subprocess
import sys

CMD = re.compile(r"^\$ (build/ringup|ringup) (.*)$")
TIME = re.compile(r"^(\s*(?:solver|Newton|check):.*?)\d+(?:\.\d+)? s$")
# Round-off: a number below 1e-12 in magnitude (a Floquet multiplier of a fast
# mode, a residual) is the last bits of the arithmetic, not a figure.
TINY = re.compile(r"-?\d+(?:\.\d+)?e-(?:1[2-9]|[2-9]\d|\d{3})\b")


def mask(line):
    return TINY.sub("~0", TIME.sub(r"\1T s", line.rstrip()))


def run(ringup, src, args):
    p = subprocess.run([ringup] + args, cwd=src, capture_output=True, text=True,
                       timeout=600)
    return p.stdout.rstrip("\n").split("\n")


def main():
    ringup, src = os.path.abspath(sys.argv[1]), sys.argv[2]
    update = "--update" in sys.argv[3:]
    path = os.path.join(src, "README.md")
    lines = open(path, encoding="utf-8").read().split("\n")
    out, i, blocks, fails = [], 0, 0, 0
    while i < len(lines):
        line = lines[i]
        out.append(line)
        i += 1
        if not line.startswith("```") or i >= len(lines):
            continue
        m = CMD.match(lines[i])
        if not m:
            continue
        end = i
        while end < len(lines) and not lines[end].startswith("```"):
            end += 1
        shown = lines[i + 1:end]
        got = run(ringup, src, m.group(2).split())
        blocks += 1
        if [mask(x) for x in shown] != [mask(x) for x in got]:
            if not update:
                fails += 1
                print("README.md:%d: `%s` prints something else:" % (i + 1, lines[i]))
                for k in range(max(len(shown), len(got))):
                    a = shown[k] if k < len(shown) else "<none>"
                    b = got[k] if k < len(got) else "<none>"
                    if mask(a) != mask(b):
                        print("  README: %s\n  now:    %s" % (a, b))
            shown = got
        out.append(lines[i])
        out.extend(shown if update else lines[i + 1:end])
        i = end
    if update:
        with open(path + ".tmp", "w", encoding="utf-8") as f:
            f.write("\n".join(out))
        os.replace(path + ".tmp", path)
        print("README.md: %d example blocks rewritten from the program" % blocks)
        return
    if blocks == 0:
        print("no example blocks found in README.md")
        sys.exit(1)
    if fails:
        print("%d of %d README examples are stale (rerun with --update and review)"
              % (fails, blocks))
        sys.exit(1)
    print("all %d README examples match the program" % blocks)


if __name__ == "__main__":
    main()
