#!/usr/bin/env python3
"""Non-test line count of Rust sources: every line of every `.rs` file given (directories are
walked), leaving out files whose name holds `tests` or that a `#[cfg(test)] mod x;` pulls in, and
every item marked `#[cfg(test)]` (an inline `mod tests { ... }`, a test-only fn) up to its closing
brace at column 0. Usage: python3 tools/nontest_loc.py src/config src/cli.rs"""
import os
import re
import sys


def files(paths):
    for p in paths:
        if os.path.isdir(p):
            for root, _, names in os.walk(p):
                for n in sorted(names):
                    if n.endswith(".rs"):
                        yield os.path.join(root, n)
        else:
            yield p


def test_modules(path, lines):
    """Files that `#[cfg(test)] mod x;` in `path` brings in."""
    out = set()
    base = os.path.splitext(path)[0] if not path.endswith("mod.rs") else os.path.dirname(path)
    for i, l in enumerate(lines[:-1]):
        if l.strip() == "#[cfg(test)]":
            m = re.match(r"\s*(?:pub(?:\([a-z]+\))?\s+)?mod\s+(\w+)\s*;", lines[i + 1])
            if m:
                out.add(os.path.normpath(os.path.join(base, m.group(1) + ".rs")))
                out.add(os.path.normpath(os.path.join(base, m.group(1), "mod.rs")))
    return out


def count(lines):
    n, i = 0, 0
    while i < len(lines):
        if lines[i].strip() == "#[cfg(test)]":
            j = i + 1
            if lines[j].rstrip().endswith(";"):
                i = j + 1
                continue
            while j < len(lines) and lines[j].rstrip() != "}":
                j += 1
            i = j + 1
            continue
        n += 1
        i += 1
    return n


all_files = list(files(sys.argv[1:]))
texts = {f: open(f, encoding="utf-8").read().split("\n")[:-1] for f in all_files}
excluded = set()
for f, ls in texts.items():
    excluded |= test_modules(f, ls)
total = 0
for f in all_files:
    if "tests" in os.path.basename(f) or os.path.normpath(f) in excluded:
        continue
    total += count(texts[f])
print(total)
