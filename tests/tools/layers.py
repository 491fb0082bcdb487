#!/usr/bin/python3
"""The layer rules of DEVELOPERS.md ("Architecture"), checked on the tree and the build.

Usage: layers.py SOURCE_DIR BUILD_DIR

1. Includes: core/ includes only core/; formats/ includes core/ and formats/; core/pipeline/
   includes neither cmd/ nor tests/; and no two files include each other, directly or through
   others.
2. Symbols: among the object files of kiln_core, kiln_formats, kiln_stages and kiln, no file
   uses a function or variable of a file that uses one of its own, directly or through others
   (a declaration written by hand instead of included is caught here too).
Prints every cycle and every include against the layers, and exits 1 if there is one.
"""
import glob
import os
import re
import subprocess
import sys

src, build = sys.argv[1], sys.argv[2]
DIRS = ["core", "core/pipeline", "formats/decoders", "formats/sources", "formats/files", "cmd"]


def layer(module):
    for prefix, rank in (("cmd/", 3), ("core/pipeline/", 2), ("formats/", 1), ("core/", 0)):
        if module.startswith(prefix):
            return rank
    return 9


def cycles(graph):
    """Strongly connected components with more than one node (Tarjan, iterative)."""
    index, low, stack, on, found, counter = {}, {}, [], set(), [], [0]
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = counter[0]
        counter[0] += 1
        stack.append(root)
        on.add(root)
        while work:
            v, it = work[-1]
            for w in it:
                if w not in graph:
                    continue
                if w not in index:
                    index[w] = low[w] = counter[0]
                    counter[0] += 1
                    stack.append(w)
                    on.add(w)
                    work.append((w, iter(sorted(graph[w]))))
                    break
                if w in on:
                    low[v] = min(low[v], index[w])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[v])
                if low[v] == index[v]:
                    comp = []
                    while True:
                        w = stack.pop()
                        on.discard(w)
                        comp.append(w)
                        if w == v:
                            break
                    if len(comp) > 1:
                        found.append(sorted(comp))
    return found


problems = []
includes = {}
for d in DIRS:
    for f in sorted(os.listdir(os.path.join(src, d))):
        if not f.endswith((".c", ".h")):
            continue
        module = os.path.join(d, f)
        includes.setdefault(module, set())
        with open(os.path.join(src, d, f), encoding="utf-8") as fh:
            for inc in re.findall(r'^#include "([^"]+)"', fh.read(), re.M):
                target = os.path.normpath(os.path.join(d, inc))
                includes[module].add(target)
                if layer(target) > layer(module):
                    problems.append(f"{module} includes {target}, a higher layer")
for comp in cycles(includes):
    problems.append("include cycle: " + " -> ".join(comp))

defined, used = {}, {}
objects = [o for o in glob.glob(os.path.join(build, "CMakeFiles", "*.dir", "**", "*.o"),
                                recursive=True)
           if re.search(r"CMakeFiles/(kiln_core|kiln_formats|kiln_stages|kiln)\.dir/", o)]
for o in objects:
    name = o.split(".dir/", 1)[1][:-len(".c.o")]
    out = subprocess.run(["nm", o], capture_output=True, text=True, check=True).stdout
    defined[name], used[name] = set(), set()
    for line in out.splitlines():
        parts = line.split()
        if len(parts) == 3 and parts[1] in "TDRBC":
            defined[name].add(parts[2])
        elif len(parts) == 2 and parts[0] == "U":
            used[name].add(parts[1])
owner = {sym: name for name, syms in defined.items() for sym in syms}
calls = {n: {owner[s] for s in u if s in owner and owner[s] != n} for n, u in used.items()}
if len(objects) < 20:
    problems.append(f"only {len(objects)} object files found under {build}: is it built?")
for comp in cycles(calls):
    problems.append("symbol cycle: " + " -> ".join(comp))

for p in problems:
    print(p)
print(f"{len(includes)} files, {len(objects)} object files: "
      + ("ok" if not problems else f"{len(problems)} problems"))
sys.exit(1 if problems else 0)
