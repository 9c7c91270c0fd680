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

"""Outcome tables for fitting: one row per answered ask, grouped by person.

The CSV is the store export: event_id,person_key,time_s,busyness,ask_load,result,request_kind,
record,request_id (the last two since asks are stored; older exports lack them).  Rows whose
`record` is `ask` are asks without evidence: they are not outcomes, but their times are the
person's ask history, from which the ask load of each outcome is recomputed under any
half-life (`AskAges`; the half-life is then estimated).  Without ask rows, a missing
`ask_load` is rebuilt from each person's earlier answered asks in the file (asks that got no
answer are then unknown), and a present `ask_load` column is used as it is (computed by the
robot with its own half-life, which then cannot be estimated).  Rows whose result is
could_not_ask carry no evidence and are skipped.  Lines starting with '#' are comments.
"""
from __future__ import annotations

import contextlib
import csv
from dataclasses import dataclass
import math
from typing import Any, Iterable, Sequence

import numpy as np
from numpy.typing import ArrayLike

from ..core.context import ask_load as core_ask_load
from ..core.model import CoreInputError, MAX_ASKS_CAP
from ..core.person import Result

HELPED, DECLINED, NO_RESPONSE = 0, 1, 2
# asks before an outcome that its load counts: the newest this many (the core never remembers
# more per person, core.model.MAX_ASKS_CAP) ...
MAX_PRIOR_ASKS = MAX_ASKS_CAP
# ... and none older than this: 40 half-lives at the longest half-life the fit searches
# (fit.site_fit.HALF_LIFE_BOUNDS_S, 7 days), where one ask adds 2^-40 (1e-12) to the load
MAX_PRIOR_ASK_AGE_S = 40 * 7 * 86400.0
RESULT_CODE = {Result.HELPED: HELPED, Result.DECLINED: DECLINED, Result.NO_RESPONSE: NO_RESPONSE}
REQUIRED_COLUMNS = ("person_key", "time_s", "busyness", "result")
MAX_CSV_FIELD_CHARS = 2**31 - 1    # csv.field_size_limit takes a C long: this fits everywhere


class FitInputError(ValueError):
    """Input data that cannot be used (names the file and line, or what is missing)."""


@dataclass(frozen=True)
class AskAges:
    """The asks before each outcome, as (outcome row, age in seconds) pairs sorted by age.

    The ask load of row j under half-life h is  sum over its pairs of 2^(-age/h)  (the core's
    `ask_load`); sorted by age, the pairs that matter for a given h (age below 40 h) are a
    prefix, so one half-life costs one vectorised pass over that prefix.
    """

    row: np.ndarray           # int32: outcome row the ask came before
    age_s: np.ndarray         # float: outcome time minus ask time, > 0, ascending

    @classmethod
    def from_lists(cls, ages_per_row: Sequence[Sequence[float]]) -> "AskAges":
        counts = np.fromiter((len(a) for a in ages_per_row), dtype=np.int64,
                             count=len(ages_per_row))
        row = np.repeat(np.arange(len(ages_per_row), dtype=np.int32), counts)
        age = (np.concatenate([np.asarray(a, float) for a in ages_per_row])
               if counts.sum() else np.zeros(0))
        return cls.of(row, age)

    @classmethod
    def of(cls, row: np.ndarray, age_s: np.ndarray) -> "AskAges":
        """Pairs as given, sorted by age.

        Ages clipped at 0 (an ask stamped after the outcome, a clock that jumped, counts as just
        made, as in the core).
        """
        age = np.maximum(np.asarray(age_s, float), 0.0)
        order = np.argsort(age, kind="stable")
        return cls(np.asarray(row, np.int32)[order], age[order])

    def reindexed(self, new_row_of_old: np.ndarray, keep: np.ndarray | None = None) -> "AskAges":
        """Return the same pairs for rows renumbered (new_row_of_old[old]).

        `keep`: old rows kept.
        """
        mask = np.ones(self.row.size, bool) if keep is None else keep[self.row]
        return AskAges(new_row_of_old[self.row[mask]].astype(np.int32), self.age_s[mask])

    def loads(self, half_life_s: float, n_rows: int) -> tuple[np.ndarray, np.ndarray]:
        """(load per row, d load / d log h per row) under half-life h (seconds)."""
        n = int(np.searchsorted(self.age_s, 40.0 * half_life_s, side="right"))
        age = self.age_s[:n]
        contrib = np.exp2(-age / half_life_s)
        load = np.bincount(self.row[:n], contrib, minlength=n_rows)
        # d/dlog h of 2^(-a/h) = 2^(-a/h) ln2 a / h
        dload = np.bincount(self.row[:n], contrib * (math.log(2.0) / half_life_s) * age,
                            minlength=n_rows)
        return load, dload


def ask_ages_from_times(outcome_person: np.ndarray, outcome_time_s: np.ndarray,
                        ask_person: np.ndarray, ask_time_s: np.ndarray,
                        max_prior: int = MAX_PRIOR_ASKS,
                        max_age_s: float = MAX_PRIOR_ASK_AGE_S) -> AskAges:
    """Return pairs (outcome, age) for every earlier ask of the same person.

    Pairs (outcome, age) for every ask of the same person strictly before each outcome (the ask the
    outcome answers shares its time and is not counted), the newest `max_prior` and none older than
    `max_age_s`. Vectorised: one sort of outcomes and asks together.
    """
    op, ot = np.asarray(outcome_person, np.int64), np.asarray(outcome_time_s, float)
    ap, at = np.asarray(ask_person, np.int64), np.asarray(ask_time_s, float)
    n_people = int(max(op.max(initial=-1), ap.max(initial=-1))) + 1
    ask_order = np.lexsort((at, ap))
    ap, at = ap[ask_order], at[ask_order]
    ask_start = np.concatenate([[0], np.cumsum(np.bincount(ap, minlength=n_people))])
    # outcomes and asks in (person, time, outcome before ask) order: the asks before an
    # outcome in that order are its person's asks stamped strictly earlier
    person = np.concatenate([op, ap])
    time_s = np.concatenate([ot, at])
    is_ask = np.concatenate([np.zeros(op.size, np.int64), np.ones(ap.size, np.int64)])
    order = np.lexsort((is_ask, time_s, person))
    asks_before = np.cumsum(is_ask[order]) - is_ask[order]
    pos = np.empty(order.size, np.int64)
    pos[order] = np.arange(order.size)
    k = asks_before[pos[:op.size]] - ask_start[op]          # asks of that person before it
    n = np.minimum(k, max_prior)
    total = int(n.sum())
    row = np.repeat(np.arange(op.size, dtype=np.int32), n)
    first = np.repeat(ask_start[op] + k - n, n)
    within = np.arange(total) - np.repeat(np.cumsum(n) - n, n)
    age = np.repeat(ot, n) - at[first + within]
    keep = age <= max_age_s
    return AskAges.of(row[keep], age[keep])


@dataclass(frozen=True)
class OutcomeData:
    """Answered asks, sorted by (person, time). Arrays all have one entry per outcome."""

    person: np.ndarray        # int index into person_keys, non-decreasing
    busyness: np.ndarray      # x in [0, 1]
    load: np.ndarray          # f >= 0, before this ask
    result: np.ndarray        # HELPED / DECLINED / NO_RESPONSE
    person_keys: tuple[str, ...]
    sources: tuple[str, ...] = ()
    prior_asks: AskAges | None = None   # ask times before each row: the half-life can be fitted
    weight: np.ndarray | None = None    # per person: how many times it counts (pseudo-outcomes)

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

    def weighted_counts(self) -> tuple[float, float, float]:
        """Return (helped, declined, no response), each row counted with its person's weight."""
        w = np.ones(self.n_outcomes) if self.weight is None else self.weight[self.person]
        helped, declined, no_response = (float(np.sum(w[self.result == r]))
                                         for r in (HELPED, DECLINED, NO_RESPONSE))
        return helped, declined, no_response

    def subset_people(self, people: np.ndarray) -> "OutcomeData":
        """Return the outcomes of the given person indices (renumbered 0..len-1)."""
        people = np.unique(np.asarray(people, dtype=int))
        mask = np.isin(self.person, people)
        remap = np.full(self.n_people, -1, dtype=int)
        remap[people] = np.arange(people.size)
        new_row = np.full(self.n_outcomes, -1, dtype=np.int64)
        new_row[mask] = np.arange(int(mask.sum()))
        asks = None if self.prior_asks is None else self.prior_asks.reindexed(new_row, mask)
        weight = None if self.weight is None else self.weight[people]
        return OutcomeData(remap[self.person[mask]], self.busyness[mask], self.load[mask],
                           self.result[mask], tuple(self.person_keys[i] for i in people),
                           self.sources, asks, weight)


def from_arrays(person: Iterable[Any], busyness: ArrayLike, load: ArrayLike, result: ArrayLike,
                person_keys: Sequence[str] | None = None, sources: Sequence[str] = (),
                prior_asks: AskAges | None = None, weight: Sequence[float] | None = None
                ) -> OutcomeData:
    """Build (and sort) a table from parallel arrays; `person` may be any hashable labels.

    `prior_asks` rows and `weight` (per person key) refer to the order given.
    """
    labels = list(person)
    if person_keys is None:
        person_keys = sorted({str(p) for p in labels})
    index = {k: i for i, k in enumerate(person_keys)}
    pidx = np.array([index[str(p)] for p in labels], dtype=int)
    order = np.argsort(pidx, kind="stable")
    if prior_asks is not None:
        new_row = np.empty(order.size, np.int64)
        new_row[order] = np.arange(order.size)
        prior_asks = prior_asks.reindexed(new_row)
    return OutcomeData(pidx[order], np.asarray(busyness, float)[order],
                       np.asarray(load, float)[order], np.asarray(result, int)[order],
                       tuple(person_keys), tuple(sources), prior_asks,
                       None if weight is None else np.asarray(weight, float))


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
    right; the csv module reads the file itself, one line at a time.
    """

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
    """Let the csv module read fields past 131 072 characters, for this read only.

    The csv module refuses a longer field; a store written before request kinds were bounded
    may hold one (fit never reads it).
    """
    before = csv.field_size_limit()
    csv.field_size_limit(MAX_CSV_FIELD_CHARS)
    try:
        yield
    finally:
        csv.field_size_limit(before)


def _read_rows(path: str, records: "_Records", asks: list) -> list:
    """Outcome rows of one file; its ask rows (person_key, time_s) go to `asks`."""
    it = iter(records)
    first = next(it, None)
    if first is None:
        raise FitInputError(f"{path}: no header line (expected columns "
                            f"{', '.join(REQUIRED_COLUMNS)}, ...)")
    header_line, header = first[0], [h.strip() for h in first[1]]
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        raise FitInputError(f"{path}:{header_line}: missing column(s) {', '.join(missing)}")
    col = {h: i for i, h in enumerate(header)}
    rows = []
    for line, fields in it:
        if len(fields) != len(header):
            raise FitInputError(f"{path}:{line}: {len(fields)} fields, header has "
                                f"{len(header)}")
        get = lambda name: fields[col[name]].strip()   # noqa: E731
        key = get("person_key")
        if not key:
            raise FitInputError(f"{path}:{line}: person_key is empty")
        if "record" in col and get("record") == "ask":
            # an ask: what the limits count, not evidence; its time is the history the ask
            # load is recomputed from
            asks.append((key, _number(path, line, "time_s", get("time_s"))))
            continue
        try:
            result = Result.parse(get("result"))
        except CoreInputError as exc:
            raise FitInputError(f"{path}:{line}: {exc}") from None
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
    asks: list[tuple[str, float]] = []     # (person_key, time_s) of the ask rows
    paths = list(paths)
    for path in paths:
        try:
            handle = open(path, newline="", encoding="utf-8")
        except OSError as exc:
            raise FitInputError(f"{path}: cannot open ({exc.strerror})") from None
        with handle, _long_fields():
            try:
                rows += _read_rows(path, _Records(handle), asks)
            except UnicodeDecodeError as exc:
                raise FitInputError(f"{path}: not UTF-8 text ({exc.reason} at byte "
                                    f"{exc.start})") from None
            except csv.Error as exc:
                raise FitInputError(f"{path}: not a readable CSV file ({exc})") from None
    rows.sort(key=lambda r: (r[0], r[1], r[2]))
    keys = sorted({r[0] for r in rows if r[5] is not Result.COULD_NOT_ASK})
    person, times, xs, fs, res = [], [], [], [], []
    asked: dict[str, list[float]] = {}
    rebuilt = False
    for key, t, _eid, x, f, result in rows:
        if result is Result.COULD_NOT_ASK:
            continue
        if f is None:   # rebuild the ask load from this person's earlier asks in the data
            f = core_ask_load(asked.get(key, []), t, ask_memory_half_life_s)
            rebuilt = True
        asked.setdefault(key, []).append(t)
        person.append(key)
        times.append(t)
        xs.append(x)
        fs.append(f)
        res.append(RESULT_CODE[result])
    if not res:
        raise FitInputError(f"{', '.join(paths)}: no answered asks (helped, declined or "
                            "no_response) to fit")
    index = {k: i for i, k in enumerate(keys)}
    pidx = np.array([index[k] for k in person], dtype=np.int64)
    prior = None
    if asks:            # the store's asks: every ask before each outcome, answered or not
        ask_keys = [(index[k], t) for k, t in asks if k in index]
        prior = ask_ages_from_times(pidx, np.asarray(times), np.array([a[0] for a in ask_keys],
                                    dtype=np.int64), np.array([a[1] for a in ask_keys]))
    elif rebuilt:       # no ask rows: the answered asks are the only history known
        prior = ask_ages_from_times(pidx, np.asarray(times), pidx, np.asarray(times))
    return from_arrays(person, xs, fs, res, keys, sources=paths, prior_asks=prior)
