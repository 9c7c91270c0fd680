"""Refused documents on a side topic: counted by reason, logged once, then throttled."""
from __future__ import annotations

import time
from collections import Counter
from typing import Callable

from ..core import CoreInputError
from ..fleet_documents import refusal_reason

REPORT_PERIOD_S = 60.0      # one line per reason per minute at most, however many arrive


class Refusals:
    """What a topic refused: the total, by reason, the last reason.  The first refusal of each
    reason is logged at once; later ones at most once per `period_s`, with the number refused
    since the last line (the counts are in /diagnostics).

    `warn` is the logger's warning method; `clock` a steady clock (seconds)."""

    def __init__(self, warn: Callable[[str], None], topic: str,
                 period_s: float = REPORT_PERIOD_S,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self._warn, self._topic, self._period_s, self._clock = warn, topic, period_s, clock
        self._since: dict[str, tuple[float, int]] = {}    # reason -> (last line at, unlogged)
        self.count = 0
        self.by_reason: Counter = Counter()
        self.last = ""
        self.lines = 0

    def add(self, exc: CoreInputError) -> None:
        reason, message = refusal_reason(exc), str(exc)
        self.count += 1
        self.by_reason[reason] += 1
        self.last = message[:200]
        now = self._clock()
        last = self._since.get(reason)
        if last is None:
            self._emit(f"{self._topic}: refused ({reason}): {message}")
        elif now - last[0] >= self._period_s:
            self._emit(f"{self._topic}: refused ({reason}) {last[1] + 1} more since the last "
                       f"report, the latest: {message}")
        else:
            self._since[reason] = (last[0], last[1] + 1)
            return
        self._since[reason] = (now, 0)

    def _emit(self, line: str) -> None:
        self.lines += 1
        self._warn(line[:400])


class CountsRefusals:
    """For a topic handler that keeps a `Refusals` in `self._refused`: the names the node's
    /diagnostics reads (refused_count, last_refusal) and the counts by reason."""

    _refused: Refusals

    @property
    def refused_count(self) -> int:
        return self._refused.count

    @property
    def refusals(self) -> Counter:
        return self._refused.by_reason

    @property
    def last_refusal(self) -> str:
        return self._refused.last
