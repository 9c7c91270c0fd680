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

"""Short, safe descriptions of any value, for error messages about bad input.

A rejected value may be anything a peer or a file can hold: a number nested a thousand lists
deep (repr recurses and raises RecursionError), a string of a megabyte, an integer of 5 000
digits (str() refuses it past 4 300 digits, float() overflows), a lone surrogate. These
helpers never recurse into a value, never convert a huge integer to text, and keep every
description under MAX_PREVIEW_CHARS characters, so a message is bounded whatever it reports.
"""
from __future__ import annotations

import math
from typing import Any

MAX_PREVIEW_CHARS = 120    # the longest text any helper here returns
_TEXT_CHARS = 24           # characters of a string value shown before "..."
_NAME_CHARS = 64           # characters of a field name shown before "..."
_LOG10_2 = math.log10(2.0)


def _type_name(value: Any) -> str:
    return type(value).__name__[:_TEXT_CHARS]


def _count(n: int, one: str, many: str) -> str:
    return f"{n} {one if n == 1 else many}"


def _quoted(text: str, limit: int = _TEXT_CHARS) -> str:
    """Return the repr of the start of `text`.

    Control characters and lone surrogates come out escaped (repr never fails on a str), shortened
    until the escapes fit too.
    """
    n = min(len(text), limit)
    shown = repr(text[:n])
    while len(shown) > limit + 2 and n > 1:
        n //= 2
        shown = repr(text[:n])
    if n < len(text):
        shown += f"... ({_count(len(text), 'character', 'characters')})"
    return shown


def short_number(value: Any) -> str:
    """Return a number as text.

    Repr for floats and ordinary integers, the size of a huge integer.
    """
    if isinstance(value, bool):
        return repr(bool(value))
    if isinstance(value, int):
        bits = int(value).bit_length()
        if bits <= 64:
            return repr(int(value))
        # from the bit length, never str(): the digit count may be off by one, hence "about"
        return f"an integer of about {int(bits * _LOG10_2) + 1} digits"
    if isinstance(value, float):
        return repr(float(value))
    return describe(value)


def describe(value: Any) -> str:
    """Type and a bounded preview of `value`, without looking inside containers."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return f"boolean {bool(value)!r}"
    if isinstance(value, int):
        shown = short_number(value)
        return shown if shown.startswith("an integer") else f"integer {shown}"
    if isinstance(value, float):
        return f"number {float(value)!r}"
    if isinstance(value, str):
        return f"string {_quoted(str(value))}"
    if isinstance(value, (bytes, bytearray)):
        return f"{_type_name(value)} of length {len(value)}"
    if isinstance(value, (list, tuple, set, frozenset)):
        return f"{_type_name(value)} of {_count(len(value), 'item', 'items')}"
    if isinstance(value, dict):
        return f"{_type_name(value)} of {_count(len(value), 'field', 'fields')}"
    return f"value of type {_type_name(value)}"


def quoted(value: Any) -> str:
    """Return a value that should have been text.

    Its quoted start if it is a string, else `describe`.
    """
    return _quoted(value) if isinstance(value, str) else describe(value)


def short_name(name: Any) -> str:
    """Return a field name or label as given by a caller (it may carry an id), bounded."""
    if not isinstance(name, str):
        return describe(name)
    if len(name) <= _NAME_CHARS and name.isprintable():
        return name
    return _quoted(name, _NAME_CHARS)
