#!/usr/bin/env python3
"""List functions in src/ longer than a limit (default 80 lines), test modules excluded.

Usage: python3 tests/tools/long_functions.py [LIMIT]; exits 1 when any is found.
Brace matching skips strings, chars and comments well enough for this code base.
"""
import pathlib
import re
import sys

LIMIT = int(sys.argv[1]) if len(sys.argv) > 1 else 80
FN = re.compile(r'^\s*(pub(\([a-z]+\))?\s+)?(const\s+)?fn\s+(\w+)')


def strip_tests(lines):
    out = []
    for i, l in enumerate(lines):
        if l.strip() == '#[cfg(test)]':
            nxt = lines[i + 1].strip() if i + 1 < len(lines) else ''
            if nxt.endswith(';'):
                continue
            break
        out.append(l)
    return out


def body_length(lines, start):
    depth = 0
    seen = False
    for j in range(start, len(lines)):
        code = re.sub(r'"(\\.|[^"\\])*"', '""', lines[j].split('//')[0])
        code = re.sub(r"'(\\.|[^'\\])'", "''", code)
        for c in code:
            if c == '{':
                depth += 1
                seen = True
            elif c == '}':
                depth -= 1
                if seen and depth == 0:
                    return j - start + 1
        if not seen and code.rstrip().endswith(';'):
            return 0
    return 0


found = []
for path in sorted(pathlib.Path('src').rglob('*.rs')):
    if path.name == 'tests.rs':
        continue
    lines = strip_tests(path.read_text().split('\n'))
    for i, l in enumerate(lines):
        m = FN.match(l)
        if m:
            n = body_length(lines, i)
            if n > LIMIT:
                found.append((n, f'{path}:{i + 1}', m.group(4)))
for n, where, name in sorted(found, reverse=True):
    print(f'{n:5d}  {where}  {name}')
sys.exit(1 if found else 0)
