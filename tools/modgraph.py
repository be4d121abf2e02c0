#!/usr/bin/env python3
"""Top-level module import graph of src/ (crate::X references outside comments and test
modules) and its cycles: `tools/modgraph.py src` prints each cycle and the count; 0 is the rule."""
import os, re, sys, itertools
root = sys.argv[1] if len(sys.argv) > 1 else 'src'
edges = {}
for dp, _, fs in os.walk(root):
    for f in fs:
        if not f.endswith('.rs'): continue
        p = os.path.join(dp, f)
        rel = os.path.relpath(p, root)
        top = rel.split(os.sep)[0].removesuffix('.rs')
        if top in ('main', 'lib'): continue
        text = open(p).read()
        # skip test modules (files named tests.rs or *_tests.rs)
        if f == 'tests.rs' or f.endswith('_tests.rs'): continue
        text = re.sub(r'#\[cfg\(test\)\]\s*mod tests \{.*', '', text, flags=re.S)
        text = re.sub(r'//.*', '', text)
        for m in re.finditer(r'crate::([a-z_]+)', text):
            t = m.group(1)
            if t != top:
                edges.setdefault(top, set()).add(t)
nodes = sorted(set(edges) | {t for v in edges.values() for t in v})
# Tarjan SCC
index = {}; low = {}; st = []; on = set(); sccs = []; i = [0]
def sc(v):
    index[v] = low[v] = i[0]; i[0] += 1; st.append(v); on.add(v)
    for w in edges.get(v, ()):
        if w not in index: sc(w); low[v] = min(low[v], low[w])
        elif w in on: low[v] = min(low[v], index[w])
    if low[v] == index[v]:
        c = []
        while True:
            w = st.pop(); on.discard(w); c.append(w)
            if w == v: break
        sccs.append(c)
sys.setrecursionlimit(10000)
for v in nodes:
    if v not in index: sc(v)
loops = [c for c in sccs if len(c) > 1]
for c in loops:
    print('cycle:', ' '.join(sorted(c)))
    for a in sorted(c):
        print('  ', a, '->', ' '.join(sorted(t for t in edges.get(a, ()) if t in c)))
print(f'{len(nodes)} modules, {len(loops)} cycles')
