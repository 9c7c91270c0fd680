#!/usr/bin/env python3

# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

"""Wrap lines over 99 columns after a comma inside brackets, in the code's own visual indent.

Usage: `python tools/dev/wrap_long_lines.py [PATH ...]` (default: the package, test/, bench/,
launch/, tools/, setup.py). A long line is broken after the last comma that keeps it within 99
columns and sits inside a bracket opened on that line; the rest goes on a new line aligned
with the bracket's first argument (pycodestyle's visual indent), and again if still too long.
Nothing else in a file changes. Lines it cannot break (long strings, comments) are listed for a
hand edit. Re-runnable: with no long lines it changes nothing.
"""
import io
import os
import sys
import tokenize

sys.path.insert(0, os.path.dirname(__file__))
from fix_docstrings import DEFAULT_PATHS, MAX_COLUMNS, python_files, ROOT  # noqa: E402


def break_point(source_lines, row):
    """Return (column after the comma, column of the continuation) for line `row`, or None.

    The comma is the rightmost that fits at the shallowest bracket depth; never one in a
    comprehension's `for` target or a lambda's parameters.
    """
    line = source_lines[row - 1]
    reader = io.StringIO("".join(source_lines[row - 1:])).readline
    opened = []   # [column just after the bracket, inside a for target or lambda parameters]
    best = None
    try:
        for tok in tokenize.generate_tokens(reader):
            if tok.start[0] > 1:
                break
            if tok.type == tokenize.OP and tok.string in "([{":
                opened.append([tok.end[1], False])
            elif tok.type == tokenize.OP and tok.string in ")]}":
                if opened:
                    opened.pop()
            elif opened and tok.type == tokenize.NAME and tok.string in ("for", "lambda"):
                opened[-1][1] = True
            elif opened and (tok.type == tokenize.NAME and tok.string == "in"
                             or tok.type == tokenize.OP and tok.string == ":"):
                opened[-1][1] = False
            elif (tok.type == tokenize.OP and tok.string == "," and opened and not opened[-1][1]
                  and tok.end[1] <= MAX_COLUMNS and line[tok.end[1]:].strip()):
                depth = len(opened)
                if best is None or depth <= best[2]:
                    best = (tok.end[1], opened[-1][0], depth)
    except (tokenize.TokenError, IndentationError, SyntaxError):
        pass
    return best[:2] if best else None


def wrap_line(lines, row):
    """Return the lines that replace line `row`, all within the limit, or None."""
    work = list(lines)
    out = []
    while len(work[row - 1].rstrip("\n")) > MAX_COLUMNS:
        point = break_point(work, row)
        if point is None or point[1] >= point[0]:
            return None
        text = work[row - 1].rstrip("\n")
        cut, indent = point
        out.append(text[:cut].rstrip() + "\n")
        work[row - 1] = " " * indent + text[cut:].lstrip() + "\n"
    return out + [work[row - 1]]


def _rows_inside_strings(source):
    """Rows that a multi-line string (a docstring, say) covers: never broken here."""
    rows = set()
    for tok in tokenize.generate_tokens(io.StringIO(source).readline):
        if tok.type == tokenize.STRING and tok.end[0] > tok.start[0]:
            rows.update(range(tok.start[0], tok.end[0] + 1))
    return rows


def wrap_file(path):
    """Wrap the long lines of one file in place; return the rows left too long."""
    with open(path, encoding="utf-8") as fh:
        lines = fh.readlines()
    left = []
    row = 1
    changed = False
    in_string = _rows_inside_strings("".join(lines))
    while row <= len(lines):
        text = lines[row - 1].rstrip("\n")
        if len(text) > MAX_COLUMNS and row in in_string:
            left.append(row)
        elif len(text) > MAX_COLUMNS:
            new = wrap_line(lines, row)
            if new is None:
                left.append(row)
            else:
                lines[row - 1:row] = new
                changed = True
                in_string = {r + len(new) - 1 if r > row else r for r in in_string}
                row += len(new) - 1
        row += 1
    if changed:
        new = "".join(lines)
        compile(new, path, "exec")   # never write a file Python cannot read
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(new)
    return changed, left


def main(argv=None):
    paths = (argv if argv is not None else sys.argv[1:]) or list(DEFAULT_PATHS)
    changed = 0
    left = 0
    for path in python_files(paths):
        did, rows = wrap_file(path)
        changed += did
        for row in rows:
            print(f"hand edit: {os.path.relpath(path, ROOT)}:{row}: line over {MAX_COLUMNS} "
                  "columns")
        left += len(rows)
    print(f"{changed} files changed, {left} long lines left for a hand edit")
    return 0


if __name__ == "__main__":
    sys.exit(main())
