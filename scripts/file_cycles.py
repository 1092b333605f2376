#!/usr/bin/env python3
"""Import cycles between the library's source files: every `crate::`/`super::` path a file names
(in `use` lines and in code, tests left out) resolved to the file that defines it; prints each
group of files that depend on each other in a circle, and exits 1 when there is one.

    python3 scripts/file_cycles.py [src]
"""
import os, re, sys

root = sys.argv[1] if len(sys.argv) > 1 else "src"
files = {}
for d, _, fs in os.walk(root):
    for f in fs:
        if f.endswith(".rs"):
            p = os.path.join(d, f)
            rel = os.path.relpath(p, root)[:-3].split(os.sep)
            if rel[-1] == "mod":
                rel = rel[:-1]
            if rel in (["lib"], ["main"]):
                rel = []
            files[p] = rel

by_mod = {tuple(v): p for p, v in files.items() if not p.endswith("main.rs")}

def file_of(path):
    for n in range(len(path), -1, -1):
        if tuple(path[:n]) in by_mod:
            return by_mod[tuple(path[:n])]
    return None

edges = {p: set() for p in files}
for p, mod in files.items():
    text = open(p, encoding="utf-8").read()
    text = re.split(r"#\[cfg\(test\)\]\s*mod tests", text)[0]
    text = re.sub(r"//[^\n]*", "", text)
    # expand `use a::{b, c::{d}}` groups roughly: take every path segment chain after crate/super
    is_mod_file = p.endswith("mod.rs") or p.endswith("lib.rs")
    for m in re.finditer(r"\b(crate|super)((?:::\w+)+)(?:::\{([^;]*?)\})?", text):
        base = m.group(1)
        segs = [s for s in m.group(2).split("::") if s]
        if base == "crate":
            start = []
        else:
            start = mod if is_mod_file else mod[:-1]
            start = start[:-1] if is_mod_file else start
            start = (mod[:-1] if not is_mod_file else mod[:-1])
        paths = [start + segs]
        if m.group(3):
            for item in re.split(r",", m.group(3)):
                item = item.strip().split(" as ")[0].strip("{} ")
                if item and item != "self":
                    paths.append(start + segs + [s for s in item.split("::") if s and s != "{"])
        for path in paths:
            f = file_of(path)
            if f and f != p and not f.endswith("lib.rs"):
                edges[p].add(f)
    # A mod.rs declaring and re-exporting its children owns them: that is not a dependency
    # (a child using its parent's types is one).
    if is_mod_file:
        here = os.path.dirname(p) + os.sep
        edges[p] = {f for f in edges[p] if not f.startswith(here)}

# Tarjan's strongly connected components
index, low, stack, on, out = {}, {}, [], set(), []
counter = [0]
sys.setrecursionlimit(10000)
def visit(v):
    index[v] = low[v] = counter[0]; counter[0] += 1
    stack.append(v); on.add(v)
    for w in edges[v]:
        if w not in index:
            visit(w); low[v] = min(low[v], low[w])
        elif w in on:
            low[v] = min(low[v], index[w])
    if low[v] == index[v]:
        comp = []
        while True:
            w = stack.pop(); on.discard(w); comp.append(w)
            if w == v:
                break
        if len(comp) > 1:
            out.append(sorted(comp))
for v in files:
    if v not in index:
        visit(v)
for c in out:
    print("cycle:", " ".join(c))
print(f"{len(files)} files, {sum(len(e) for e in edges.values())} file dependencies, {len(out)} cycles")
sys.exit(1 if out else 0)
