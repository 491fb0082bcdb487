#!/usr/bin/python3
"""The layer rules of DEVELOPERS.md ("Architecture"), checked on the tree and the build.

Usage: layers.py SOURCE_DIR BUILD_DIR

1. Includes: core/ includes only core/; formats/ includes core/ and formats/; core/pipeline/
   includes neither cmd/ nor tests/; and no two files include each other, directly or through
   others.
2. Symbols: among the object files of kiln_core, kiln_formats, kiln_stages and kiln, no file
   uses a function or variable of a file that uses one of its own, directly or through others
   (a declaration written by hand instead of included is caught here too).
3. Size: no function of the stages (core/pipeline/*.c) is longer than 80 lines, from the line
   of its name to its closing brace (DEVELOPERS.md, "Conventions").
Prints every cycle, every include against the layers and every long function, and exits 1 if
there is one.
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

# A function starts at a line that begins with its return type and holds its name and "(";
# its body is the first line that is only "{" and ends at the first line that is only "}".
FUNCTION_LINES = 80
for path in sorted(glob.glob(os.path.join(src, "core/pipeline/*.c"))):
    with open(path, encoding="utf-8") as f:
        lines = f.read().split("\n")
    start = None
    for i, line in enumerate(lines):
        if start is None and re.match(r"^[a-z].*\(", line) and not line.endswith(";"):
            j = i
            while j < len(lines) and lines[j] != "{" and not lines[j].endswith(";"):
                j += 1
            if j < len(lines) and lines[j] == "{":
                start = (i, line)
        elif line == "}" and start is not None:
            if i - start[0] > FUNCTION_LINES:
                name = re.search(r"(\w+)\(", start[1]).group(1)
                problems.append(f"{os.path.relpath(path, src)}:{start[0] + 1}: {name} is "
                                f"{i - start[0]} lines (at most {FUNCTION_LINES} in the stages)")
            start = None

for p in problems:
    print(p)
print(f"{len(includes)} files, {len(objects)} object files: "
      + ("ok" if not problems else f"{len(problems)} problems"))
sys.exit(1 if problems else 0)
