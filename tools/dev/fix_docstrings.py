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

"""Rewrite docstrings into the form ament_pep257 checks, without touching anything else.

Usage: `python tools/dev/fix_docstrings.py [--check] [PATH ...]` (default: the package, test/,
bench/, launch/, tools/, setup.py). Re-runnable: a docstring already in form is left as it is,
so the script can be applied again after a merge. `--check` only lists what it would change.

What it does, by the checks of pydocstyle:
- the summary is one line that ends with a period (D205, D400, D415): a first paragraph that
  fits on one line is joined; a longer one is split after its first sentence, or else at a
  clause break (`;`, `:`, a dash, a comma), and the rest opens the description;
- closing quotes of a multi-line docstring go on a line of their own (D209), and a docstring
  whose text fits on one line becomes a one-line docstring (D200);
- a function's summary is in the imperative (D401): "Returns" becomes "Return" and "The x..."
  "Return the x..." (not in a function annotated `-> None`, nor in a test function, of which
  pydocstyle asks no verb).

What it cannot rewrite (no clause break within the line) it lists for a hand edit.
"""
import argparse
import ast
import io
import os
import re
import sys
import textwrap
import tokenize

try:   # pydocstyle's own verb lists (it is in the venv with ament_pep257)
    from pydocstyle.wordlists import IMPERATIVE_VERBS, stem
except ImportError:
    IMPERATIVE_VERBS, stem = {}, None

MAX_COLUMNS = 99
ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
DEFAULT_PATHS = ("helpaware_node", "test", "bench", "launch", "tools", "setup.py")
# first words pydocstyle refuses as a summary's first word that read well after "Return"
RETURN_WORDS = {"the", "a", "an", "what", "true", "false", "this", "these"}
# a clause after a comma that starting with these would not stand alone as a sentence
NOT_A_SENTENCE_START = {"that", "which", "who", "whose", "whom", "in", "of", "to", "from", "by",
                        "at", "on", "not", "than", "for", "with", "per", "as", "into", "over"}
ABBREVIATIONS = ("e.g.", "i.e.", "etc.", "vs.", "cf.", "no.", "approx.")


def docstring_nodes(tree):
    """Yield (node, is_function) for every module, class and function docstring."""
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = node.body
            if (body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant)
                    and isinstance(body[0].value.value, str)):
                yield node, body[0].value, isinstance(node, (ast.FunctionDef,
                                                             ast.AsyncFunctionDef))


def _starts_sentence(text):
    return bool(text) and (text[0].isupper() or text[0] in "`\"'(")


def _sentence_end(text, width):
    """Return the index just past the last sentence end ('. ') that fits in `width`, or -1."""
    best = -1
    depth = 0
    in_code = False
    for i, ch in enumerate(text):
        if i >= width:
            break
        if ch == "`":
            in_code = not in_code
        elif ch in "([{" and not in_code:
            depth += 1
        elif ch in ")]}" and not in_code:
            depth = max(0, depth - 1)
        elif (ch in ".?!" and not in_code and depth == 0 and text[i + 1:i + 2] == " "
              and _starts_sentence(text[i + 1:].lstrip())):
            word = text[:i + 1].rsplit(" ", 1)[-1].lower()
            if word not in ABBREVIATIONS and not re.fullmatch(r"[a-z]\.", word):
                best = i + 1
    return best


def _clause_break(text, width):
    """Return (cut, rest_start) at the best clause break that fits in `width`, or None."""
    found = {}
    depth = 0
    in_code = False
    for i, ch in enumerate(text):
        if i >= width:
            break
        if ch == "`":
            in_code = not in_code
            continue
        if in_code:
            continue
        if ch in "([{":
            depth += 1
        elif ch in ")]}":
            depth = max(0, depth - 1)
        elif depth == 0 and text[i:i + 2] in ("; ", ": "):
            found.setdefault(text[i], []).append((i, i + 2))
        elif depth == 0 and text[i:i + 2] == ", ":
            if text[i + 2:].split(" ", 1)[0].lower() not in NOT_A_SENTENCE_START:
                found.setdefault(",", []).append((i, i + 2))
        elif depth == 0 and text[i:i + 3] in (" - ", " \u2014 "):
            found.setdefault("-", []).append((i, i + 3))
    for kind in (";", ":", "-", ","):
        options = [c for c in found.get(kind, []) if c[0] >= 20]
        if options:
            return options[-1]
    return None


GREEK = {"alpha", "beta", "gamma", "delta", "epsilon", "kappa", "lambda", "mu", "nu", "xi", "pi",
         "rho", "sigma", "tau", "phi", "chi", "psi", "omega", "theta", "eta", "zeta"}


def _capitalize(text):
    """Capitalize a sentence's first word unless it reads as a symbol (x, tau, f(x), a_b)."""
    m = re.match(r"([A-Za-z]+)(.?)", text)
    if (not m or not m.group(1).islower() or len(m.group(1)) < 2 or m.group(1) in GREEK
            or m.group(2) in "(_=[0123456789"):
        return text
    return text[:1].upper() + text[1:]


def imperative(summary, func_name, returns_none=False):
    """Return the summary with a first word pydocstyle takes as imperative, where it can.

    A function annotated `-> None` returns nothing, so "Return" would misread it: left alone
    (pydocstyle lists it for a hand edit).
    """
    m = re.match(r"([A-Za-z]+)(\W.*|$)", summary, re.S)
    if not m or func_name.startswith("test"):
        return summary   # pydocstyle asks no verb of a test function
    forms = IMPERATIVE_VERBS.get(stem(m.group(1).lower())) if stem else None
    if forms and m.group(1).lower() not in forms:   # "Returns" -> "Return", as pydocstyle says
        best = max(forms, key=lambda f: len(os.path.commonprefix([f, m.group(1).lower()])))
        return best.capitalize() + m.group(2)
    if returns_none or m.group(1).lower() not in RETURN_WORDS:
        return summary
    word = m.group(1)
    low = word.lower() if word[:1].isupper() and word[1:].islower() or len(word) == 1 else word
    if word in ("True", "False"):
        low = word
    return "Return " + low + m.group(2)


def _end_with_period(text):
    text = text.rstrip()
    if text.endswith((".", "?", "!")) and not text.endswith("..."):
        return text if text.endswith(".") else text[:-1] + "."
    if text.endswith((",", ";", ":")):
        return text[:-1] + "."
    return text + "."


def rewrite(literal, indent, func_name, returns_none=False):
    """Return the new source of one docstring literal (or the same text), and a problem note."""
    m = re.match(r'([rRuU]?)("""|\'\'\'|"|\')(.*)\2$', literal, re.S)
    if not m:
        return literal, None
    prefix, quote, body = m.groups()
    if len(quote) == 1:
        quote = '"""'   # a one-line "..." docstring is written the usual way
    lines = body.split("\n")
    if not lines[0].strip():
        return literal, None   # the summary on the second line: not our style, left alone
    lines[0] = lines[0].lstrip()
    # the first paragraph: lines up to the first blank one
    end = 0
    while end < len(lines) and lines[end].strip():
        end += 1
    first = [x.strip() for x in lines[:end]]
    rest = lines[end:]
    while rest and not rest[-1].strip():
        rest.pop()
    summary = " ".join(first)
    if func_name is not None:
        summary = imperative(summary, func_name, returns_none)
    # a docstring of one paragraph must fit on one line with both quotes (D200)
    room = MAX_COLUMNS - len(indent) - len(prefix) - (3 if rest else 6)
    desc_first = ""
    fitting = summary if summary.endswith((".", "?", "!")) else _end_with_period(summary)
    if len(fitting) <= room:
        summary = fitting
    else:
        cut = _sentence_end(summary, room)
        if cut > 0:
            summary, desc_first = summary[:cut], summary[cut:].strip()
        else:
            brk = _clause_break(summary, room - 1)
            if brk is None:
                return literal, "summary has no break within the line"
            summary, desc_first = summary[:brk[0]], summary[brk[1]:].strip()
            if desc_first.startswith("and "):
                desc_first = desc_first[4:]
            desc_first = _capitalize(desc_first)
        summary = _end_with_period(summary)
    out = [summary]
    if desc_first:
        width = MAX_COLUMNS - len(indent)
        out.append("")
        out.extend(indent + x for x in textwrap.wrap(desc_first, width, break_long_words=False,
                                                     break_on_hyphens=False))
    out.extend(rest)
    if len(out) == 1 and len(indent) + len(prefix) + 6 + len(summary) <= MAX_COLUMNS:
        return f"{prefix}{quote}{summary}{quote}", None
    return prefix + quote + "\n".join(out) + "\n" + indent + quote, None


def fix_source(source, path):
    tree = ast.parse(source, path)
    lines = source.splitlines(keepends=True)
    offsets = [0]
    for line in lines:
        offsets.append(offsets[-1] + len(line))
    edits = []
    problems = []
    for node, const, is_function in docstring_nodes(tree):
        # ast columns count UTF-8 bytes
        start = offsets[const.lineno - 1] + _chars(lines[const.lineno - 1], const.col_offset)
        stop = offsets[const.end_lineno - 1] + _chars(lines[const.end_lineno - 1],
                                                      const.end_col_offset)
        literal = source[start:stop]
        if not _single_token(literal):
            continue   # implicit concatenation or the like: left to a hand edit
        indent = " " * const.col_offset
        # a property reads as a noun ("The x."): pydocstyle does not ask it for a verb
        name = node.name if is_function and not _is_property(node) else None
        returns_none = (is_function and isinstance(node.returns, ast.Constant)
                        and node.returns.value is None)
        new, problem = rewrite(literal, indent, name, returns_none)
        if problem:
            problems.append(f"{path}:{const.lineno}: {problem}")
        if new != literal:
            edits.append((start, stop, new))
        # D204: a blank line after a class docstring when code follows it
        if isinstance(node, ast.ClassDef) and len(node.body) > 1:
            after = lines[const.end_lineno] if const.end_lineno < len(lines) else ""
            if after.strip():
                edits.append((stop, stop, "\n"))
    for start, stop, new in sorted(edits, reverse=True):
        source = source[:start] + new + source[stop:]
    return source, problems


def _is_property(node):
    names = {getattr(d, "id", getattr(d, "attr", "")) for d in node.decorator_list}
    return bool(names & {"property", "cached_property", "setter"})


def _chars(line, byte_offset):
    return len(line.encode("utf-8")[:byte_offset].decode("utf-8"))


def _single_token(literal):
    try:
        toks = [t for t in tokenize.generate_tokens(io.StringIO(literal).readline)
                if t.type not in (tokenize.NEWLINE, tokenize.NL, tokenize.ENDMARKER)]
    except (tokenize.TokenError, SyntaxError):
        return False
    return len(toks) == 1 and toks[0].type == tokenize.STRING


def python_files(paths):
    skip = {".venv", "build", "install", "log", "__pycache__", ".git", "out"}
    for path in paths:
        full = os.path.join(ROOT, path)
        if os.path.isfile(full):
            yield full
            continue
        for base, dirs, files in os.walk(full):
            dirs[:] = sorted(d for d in dirs if d not in skip and not d.startswith("."))
            for f in sorted(files):
                if f.endswith(".py"):
                    yield os.path.join(base, f)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="list, do not write")
    parser.add_argument("paths", nargs="*", default=list(DEFAULT_PATHS))
    args = parser.parse_args(argv)
    changed = 0
    all_problems = []
    for path in python_files(args.paths):
        with open(path, encoding="utf-8") as fh:
            source = fh.read()
        new, problems = fix_source(source, os.path.relpath(path, ROOT))
        all_problems += problems
        if new != source:
            changed += 1
            if args.check:
                print(f"would change {os.path.relpath(path, ROOT)}")
            else:
                compile(new, path, "exec")   # never write a file Python cannot read
                with open(path, "w", encoding="utf-8") as fh:
                    fh.write(new)
    for p in all_problems:
        print(f"hand edit: {p}")
    print(f"{changed} files {'to change' if args.check else 'changed'}, "
          f"{len(all_problems)} docstrings for a hand edit")
    return 1 if args.check and changed else 0


if __name__ == "__main__":
    sys.exit(main())
