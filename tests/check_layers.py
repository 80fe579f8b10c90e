#!/usr/bin/env python3
"""check_layers.py: the source tree keeps its layers (DEVELOPERS.md, "Layout").

Every file in src/LAYER/ may include only headers of its own layer or of a layer
below it: private headers by their folder (`engines/modes.h`), public headers
(include/ringup/NAME.h) by the layer that implements them (the table below).
Data flows down the list; nothing reaches back up. Also: every source file
starts with a head comment, and no source file runs much past 600 lines.
Given the object files too, the calls between them (read with nm) must
also go downward: no file calls a function of a higher layer, and no two files
call each other, directly or around a longer circle.

Usage: check_layers.py SOURCE_DIR [OBJECT_FILES...]
  (ctest passes the library's and the CLI's objects, ';'-separated lists allowed)
"""
import collections
import os
import re
import subprocess
import sys

# Bottom to top. Keep in step with RU_LAYERS in CMakeLists.txt.
LAYERS = ["base", "parts", "circuit", "system", "engines", "measure", "output",
          "analysis", "batch", "cli"]

# Which layer each public header belongs to.
PUBLIC = {
    "status.h": "base", "format.h": "base",
    "part.h": "parts",
    "circuit.h": "circuit", "loader.h": "circuit", "params.h": "circuit",
    "system.h": "system",
    "transient.h": "engines", "smallsig.h": "engines", "descfn.h": "engines",
    "steady.h": "engines", "ppv.h": "engines", "hb.h": "engines",
    "envfollow.h": "engines", "margin.h": "engines",
    "stray.h": "engines",
    "measure.h": "measure", "verdict.h": "measure",
    "wavefile.h": "output", "plot.h": "output", "wav.h": "output", "outfile.h": "output",
    "json.h": "output",
    "analysis.h": "analysis", "tone.h": "analysis",
    "batch.h": "batch", "montecarlo.h": "batch", "units.h": "batch",
    "corners.h": "batch",
}

MAX_LINES = 650  # "about 600 lines" (issue 8), with a little room
# Files allowed over the limit: none. Split a file rather than list it here.
OVER_LIMIT = set()

INCLUDE = re.compile(r'^\s*#\s*include\s+"([^"]+)"', re.M)


def layer_of_header(inc, where):
    if inc.startswith("ringup/"):
        name = inc[len("ringup/"):]
        if name not in PUBLIC:
            raise SystemExit("%s: public header %s has no layer in "
                             "tests/check_layers.py" % (where, inc))
        return PUBLIC[name]
    return inc.split("/")[0] if "/" in inc else None


def call_graph(objs, rank):
    """Problems in the calls between the library's and the CLI's object files."""
    defined, used = {}, collections.defaultdict(set)
    for o in objs:
        name = o.rsplit(os.sep + "src" + os.sep, 1)[1][:-len(".c.o")]
        out = subprocess.run(["nm", o], capture_output=True, text=True).stdout
        for line in out.splitlines():
            f = line.split()
            if len(f) == 3 and f[1] in "TDBR":
                defined[f[2]] = name
            elif len(f) == 2 and f[0] == "U":
                used[name].add(f[1])
    graph = collections.defaultdict(set)
    problems = []
    for a, syms in used.items():
        for sym in syms:
            b = defined.get(sym)
            if b is None or b == a:
                continue
            graph[a].add(b)
            la, lb = a.split("/")[0], b.split("/")[0]
            if rank.get(lb, -1) > rank.get(la, -1):
                problems.append("src/%s.c (%s) calls %s of src/%s.c (the higher "
                                "layer %s)" % (a, la, sym, b, lb))
    # Circles: strongly connected components of more than one file (Tarjan).
    index, low, stack, on, comps, counter = {}, {}, [], set(), [], [0]

    def visit(v):
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                comps.append(sorted(comp))

    for v in sorted(set(graph) | set(used)):
        if v not in index:
            visit(v)
    for comp in comps:
        problems.append("calls go around a circle: %s" % " <-> ".join(
            "src/%s.c" % c for c in comp))
    if not objs:
        problems.append("no object files given")
    return problems


def main():
    src = os.path.join(sys.argv[1], "src")
    inc_dir = os.path.join(sys.argv[1], "include", "ringup")
    problems = []
    rank = {l: i for i, l in enumerate(LAYERS)}
    for layer in sorted(os.listdir(src)):
        folder = os.path.join(src, layer)
        if not os.path.isdir(folder):
            problems.append("src/%s: a file outside the layer folders" % layer)
            continue
        if layer not in rank:
            problems.append("src/%s/: not a layer (add it to LAYERS, in order)"
                            % layer)
            continue
        for name in sorted(os.listdir(folder)):
            if not name.endswith((".c", ".h")):
                continue
            path = os.path.join(folder, name)
            rel = "src/%s/%s" % (layer, name)
            text = open(path, encoding="utf-8").read()
            if not text.lstrip().startswith("/*"):
                problems.append("%s: no head comment" % rel)
            nlines = text.count("\n")
            if nlines > MAX_LINES and rel not in OVER_LIMIT:
                problems.append("%s: %d lines (split it: about 600 at most)"
                                % (rel, nlines))
            for inc in INCLUDE.findall(text):
                other = layer_of_header(inc, rel)
                if other is None:
                    problems.append("%s: include \"%s\" without its folder"
                                    % (rel, inc))
                elif other not in rank:
                    problems.append("%s: include \"%s\" of no layer" % (rel, inc))
                elif rank[other] > rank[layer]:
                    problems.append("%s (%s) includes %s of the higher layer %s"
                                    % (rel, layer, inc, other))
    for name in sorted(os.listdir(inc_dir)):
        path = os.path.join(inc_dir, name)
        mine = PUBLIC.get(name)
        if mine is None:
            problems.append("include/ringup/%s: no layer in tests/check_layers.py"
                            % name)
            continue
        text = open(path, encoding="utf-8").read()
        if not text.lstrip().startswith("/*"):
            problems.append("include/ringup/%s: no head comment" % name)
        for inc in INCLUDE.findall(text):
            other = layer_of_header(inc, name)
            if other is None or rank[other] > rank[mine]:
                problems.append("include/ringup/%s (%s) includes %s of a higher "
                                "layer" % (name, mine, inc))
    if len(sys.argv) > 2:
        objs = [o for arg in sys.argv[2:] for o in arg.split(";") if o]
        problems += call_graph(objs, rank)
    for p in problems:
        print(p)
    if problems:
        sys.exit(1)
    print("layers kept: %s" % " < ".join(LAYERS))


if __name__ == "__main__":
    main()
