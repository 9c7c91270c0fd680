"""Refused documents on a side topic: logged once, then throttled, with how many came since."""
from __future__ import annotations

import time
from typing import Callable

REPORT_PERIOD_S = 60.0      # one line per reason per minute at most, however many arrive


class RefusalLog:
    """The first refusal of each reason is logged at once; later ones at most once per
    `period_s`, with the number refused since the last line (the counts are in /diagnostics).

    `warn` is the logger's warning method; `clock` a steady clock (seconds)."""

    def __init__(self, warn: Callable[[str], None], topic: str,
                 period_s: float = REPORT_PERIOD_S,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self._warn, self._topic, self._period_s, self._clock = warn, topic, period_s, clock
        self._since: dict[str, tuple[float, int]] = {}    # reason -> (last line at, unlogged)
        self.lines = 0

    def note(self, reason: str, message: str) -> None:
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
