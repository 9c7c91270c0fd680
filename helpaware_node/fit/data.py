"""Outcome tables for fitting: one row per answered ask, grouped by person.

The CSV is the store export: event_id,person_key,time_s,busyness,ask_load,result,request_kind,
record,request_id (the last two since asks are stored; older exports lack them).  Rows whose
`record` is `ask` are asks without evidence and are skipped.  `ask_load` may be missing; it is
then rebuilt from each person's earlier answered asks in the file with the core's own
`ask_load` (asks that could not be made do not count).  Rows whose result is could_not_ask
carry no evidence and are skipped.  Lines starting with '#' are comments.
"""
from __future__ import annotations

import contextlib
import csv
import math
from dataclasses import dataclass
from typing import Iterable, Sequence

import numpy as np

from ..core.context import ask_load as core_ask_load
from ..core.model import CoreInputError
from ..core.person import Result

HELPED, DECLINED, NO_RESPONSE = 0, 1, 2
RESULT_CODE = {Result.HELPED: HELPED, Result.DECLINED: DECLINED, Result.NO_RESPONSE: NO_RESPONSE}
REQUIRED_COLUMNS = ("person_key", "time_s", "busyness", "result")
MAX_CSV_FIELD_CHARS = 2**31 - 1    # csv.field_size_limit takes a C long: this fits everywhere


class FitInputError(ValueError):
    """Input data that cannot be used (names the file and line, or what is missing)."""


@dataclass(frozen=True)
class OutcomeData:
    """Answered asks, sorted by (person, time). Arrays all have one entry per outcome."""

    person: np.ndarray        # int index into person_keys, non-decreasing
    busyness: np.ndarray      # x in [0, 1]
    load: np.ndarray          # f >= 0, before this ask
    result: np.ndarray        # HELPED / DECLINED / NO_RESPONSE
    person_keys: tuple[str, ...]
    sources: tuple[str, ...] = ()

    @property
    def n_outcomes(self) -> int:
        return int(self.result.size)

    @property
    def n_people(self) -> int:
        return len(self.person_keys)

    def counts(self) -> dict[str, int]:
        return {"helped": int(np.sum(self.result == HELPED)),
                "declined": int(np.sum(self.result == DECLINED)),
                "no_response": int(np.sum(self.result == NO_RESPONSE))}

    def subset_people(self, people: np.ndarray) -> "OutcomeData":
        """The outcomes of the given person indices (renumbered 0..len-1)."""
        people = np.unique(np.asarray(people, dtype=int))
        mask = np.isin(self.person, people)
        remap = np.full(self.n_people, -1, dtype=int)
        remap[people] = np.arange(people.size)
        return OutcomeData(remap[self.person[mask]], self.busyness[mask], self.load[mask],
                           self.result[mask], tuple(self.person_keys[i] for i in people),
                           self.sources)


def from_arrays(person: Sequence, busyness: Sequence, load: Sequence, result: Sequence,
                person_keys: Sequence[str] | None = None, sources: Sequence[str] = ()
                ) -> OutcomeData:
    """Build (and sort) a table from parallel arrays; `person` may be any hashable labels."""
    labels = list(person)
    if person_keys is None:
        person_keys = sorted({str(p) for p in labels})
    index = {k: i for i, k in enumerate(person_keys)}
    pidx = np.array([index[str(p)] for p in labels], dtype=int)
    order = np.argsort(pidx, kind="stable")
    return OutcomeData(pidx[order], np.asarray(busyness, float)[order],
                       np.asarray(load, float)[order], np.asarray(result, int)[order],
                       tuple(person_keys), tuple(sources))


def from_group_counts(successes: Sequence[int], trials: Sequence[int]) -> OutcomeData:
    """Binomial groups as outcomes without context: y helps and n - y declines per group."""
    person, res = [], []
    for g, (y, n) in enumerate(zip(successes, trials)):
        if y < 0 or n < y:
            raise FitInputError(f"group {g}: successes {y} and trials {n} need 0 <= y <= n")
        person += [g] * int(n)
        res += [HELPED] * int(y) + [DECLINED] * int(n - y)
    keys = [str(g) for g in range(len(trials))]
    zeros = np.zeros(len(res))
    return from_arrays([str(p) for p in person], zeros, zeros, res, keys)


def _number(path: str, line: int, name: str, text: str) -> float:
    try:
        v = float(text)
    except (TypeError, ValueError):
        raise FitInputError(f"{path}:{line}: {name} {text!r} is not a number") from None
    if not math.isfinite(v):
        raise FitInputError(f"{path}:{line}: {name} {text!r} is not finite")
    return v


class _Records:
    """The CSV records of one open file, each with the number of the line it starts on.

    Comment ('#') and blank lines are skipped only between records, so a quoted field that
    holds line breaks (a request kind from a peer may) stays whole and the line numbers stay
    right; the csv module reads the file itself, one line at a time."""

    def __init__(self, handle) -> None:
        self._handle = handle
        self._between = True          # the next line starts a record
        self.line = 0                 # the line just read
        self.start = 0                # the line the current record starts on

    def _lines(self):
        for self.line, text in enumerate(self._handle, start=1):
            if self._between:
                if not text.strip() or text.lstrip().startswith("#"):
                    continue
                self.start = self.line
            self._between = False
            yield text

    def __iter__(self):
        for fields in csv.reader(self._lines()):
            self._between = True
            yield self.start, fields


@contextlib.contextmanager
def _long_fields():
    """The csv module refuses a field past 131 072 characters; a store written before request
    kinds were bounded may hold a longer one (fit never reads it). Raised for this read only."""
    before = csv.field_size_limit()
    csv.field_size_limit(MAX_CSV_FIELD_CHARS)
    try:
        yield
    finally:
        csv.field_size_limit(before)


def _read_rows(path: str, records: "_Records") -> list:
    records = iter(records)
    first = next(records, None)
    if first is None:
        raise FitInputError(f"{path}: no header line (expected columns "
                            f"{', '.join(REQUIRED_COLUMNS)}, ...)")
    header_line, header = first[0], [h.strip() for h in first[1]]
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        raise FitInputError(f"{path}:{header_line}: missing column(s) {', '.join(missing)}")
    col = {h: i for i, h in enumerate(header)}
    rows = []
    for line, fields in records:
        if len(fields) != len(header):
            raise FitInputError(f"{path}:{line}: {len(fields)} fields, header has "
                                f"{len(header)}")
        get = lambda name: fields[col[name]].strip()   # noqa: E731
        if "record" in col and get("record") == "ask":
            continue            # an ask: what the limits count, not evidence
        try:
            result = Result.parse(get("result"))
        except CoreInputError as exc:
            raise FitInputError(f"{path}:{line}: {exc}") from None
        key = get("person_key")
        if not key:
            raise FitInputError(f"{path}:{line}: person_key is empty")
        t = _number(path, line, "time_s", get("time_s"))
        x = _number(path, line, "busyness", get("busyness"))
        if not 0.0 <= x <= 1.0:
            raise FitInputError(f"{path}:{line}: busyness {x!r} is outside [0, 1]")
        f = None
        if "ask_load" in col and get("ask_load") != "":
            f = _number(path, line, "ask_load", get("ask_load"))
            if f < 0.0:
                raise FitInputError(f"{path}:{line}: ask_load {f!r} must be >= 0")
        eid = get("event_id") if "event_id" in col else f"{path}:{line}"
        rows.append((key, t, eid, x, f, result))
    return rows


def read_outcome_csv(paths: Iterable[str], ask_memory_half_life_s: float = 1800.0) -> OutcomeData:
    """Read one or more outcome CSV files into one table (people keyed across files)."""
    rows = []   # (person_key, time_s, event_id, busyness, load or None, result or None)
    paths = list(paths)
    for path in paths:
        try:
            handle = open(path, newline="", encoding="utf-8")
        except OSError as exc:
            raise FitInputError(f"{path}: cannot open ({exc.strerror})") from None
        with handle, _long_fields():
            try:
                rows += _read_rows(path, _Records(handle))
            except UnicodeDecodeError as exc:
                raise FitInputError(f"{path}: not UTF-8 text ({exc.reason} at byte "
                                    f"{exc.start})") from None
            except csv.Error as exc:
                raise FitInputError(f"{path}: not a readable CSV file ({exc})") from None
    rows.sort(key=lambda r: (r[0], r[1], r[2]))
    keys = sorted({r[0] for r in rows if r[5] is not Result.COULD_NOT_ASK})
    person, xs, fs, res = [], [], [], []
    asked: dict[str, list[float]] = {}
    for key, t, _eid, x, f, result in rows:
        if result is Result.COULD_NOT_ASK:
            continue
        if f is None:   # rebuild the ask load from this person's earlier asks in the data
            f = core_ask_load(asked.get(key, []), t, ask_memory_half_life_s)
        asked.setdefault(key, []).append(t)
        person.append(key)
        xs.append(x)
        fs.append(f)
        res.append(RESULT_CODE[result])
    if not res:
        raise FitInputError(f"{', '.join(paths)}: no answered asks (helped, declined or "
                            "no_response) to fit")
    return from_arrays(person, xs, fs, res, keys, sources=paths)
