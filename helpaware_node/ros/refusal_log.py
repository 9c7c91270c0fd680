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

"""Log lines that documents cause, bounded.

Counted by kind, the first logged at once, the rest at most once a period with their number.
Refused documents on a side topic go through it, and so do the node's per-document notes (an
unknown request resolved, a privacy request applied): valid but pointless documents at any rate
give a few lines a minute, and the counts go to /diagnostics.
"""
from __future__ import annotations

from collections import Counter
import time
from typing import Callable, Optional

from ..core import CoreInputError
from ..fleet_documents import refusal_reason
from ..store.ids import refused_by_store

REPORT_PERIOD_S = 60.0      # one line per kind per minute at most, however many arrive
MAX_KINDS = 200             # kinds told apart; any more are counted together as "other"
HANDLER_ERROR = "handler_error"     # a document whose handling failed for no named field


class HandlerFailure(CoreInputError):
    """Handling one document raised something other than a refusal.

    Contained and counted under HANDLER_ERROR (a defect to report; the tests hold this count at
    zero).
    """

    reason = HANDLER_ERROR


def exception_text(exc: BaseException, limit: int = 200) -> str:
    """`Type: message` of any exception, bounded.

    Never fails (a KeyError's text is the repr of its key, which may be nested too deep to print).
    """
    try:
        text = str(exc)
    except Exception:  # noqa: BLE001 - RecursionError, a huge integer, a broken __str__
        text = "(its message cannot be printed)"
    return f"{type(exc).__name__}: {text}"[:limit]


class LogThrottle:
    """Lines by kind: the first of each kind goes out at once.

    Later ones at most once per `period_s` (the line then says how many were held back); every one
    is counted.  `clock` is a steady clock in seconds.
    """

    def __init__(self, period_s: float = REPORT_PERIOD_S,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self._period_s, self._clock = period_s, clock
        self._since: dict[str, tuple[float, int]] = {}    # kind -> (last line at, held back)
        self.counts: Counter = Counter()
        self.lines = 0

    @property
    def held_back(self) -> int:
        """Lines counted but not logged."""
        return sum(self.counts.values()) - self.lines

    def due(self, kind: str, line: str, period_s: Optional[float] = None) -> Optional[str]:
        """Count one line of `kind`.

        The text to log now (with how many were held back since the last one), or None while its
        kind waits. The caller logs it from its own call site: rclpy ties a severity to each line
        of code that logs.
        """
        if kind not in self.counts and len(self.counts) >= MAX_KINDS:
            kind = "other"
        self.counts[kind] += 1
        now = self._clock()
        last = self._since.get(kind)
        period = self._period_s if period_s is None else period_s
        if last is not None and now - last[0] < period:
            self._since[kind] = (last[0], last[1] + 1)
            return None
        if last is not None and last[1]:
            line = f"{line} [{last[1]} more like this since the last such line]"
        self._since[kind] = (now, 0)
        self.lines += 1
        return line[:400]


class Refusals:
    """What a topic refused: the total, by reason, the last reason.

    The first refusal of each reason is logged at once; later ones at most once per `period_s`,
    with the number refused since the last line (the counts are in /diagnostics).

    `warn` is the logger's warning method; `clock` a steady clock (seconds).
    """

    def __init__(self, warn: Callable[[str], None], topic: str,
                 period_s: float = REPORT_PERIOD_S,
                 clock: Callable[[], float] = time.monotonic) -> None:
        self._warn, self._topic = warn, topic
        self._log = LogThrottle(period_s, clock)
        self.count = 0
        self.last = ""

    @property
    def by_reason(self) -> Counter:
        return self._log.counts

    @property
    def lines(self) -> int:
        return self._log.lines

    def add(self, exc: CoreInputError) -> None:
        reason, message = refusal_reason(exc), str(exc)
        self.count += 1
        self.last = message[:200]
        text = self._log.due(reason, f"{self._topic}: refused ({reason}): {message}")
        if text is not None:
            self._warn(text)

    def failed(self, exc: BaseException, log: LogThrottle, error: Callable[[str], None]) -> bool:
        """Count and log a document whose handling raised `exc`, which is not a refusal.

        The store refusing a write (disk full, read-only: store.ids.refused_by_store) is logged
        through `log` as `store_failure` and True returned (the caller counts it); anything else is
        counted as a refusal under HANDLER_ERROR. Either way the document is dropped.
        """
        if refused_by_store(exc):
            text = log.due("store_failure", f"{self._topic}: the store refused a write "
                           f"({exception_text(exc)}); applied when offered again")
            if text is not None:
                error(text)
            return True
        self.add(HandlerFailure(f"{self._topic}: a document could not be handled "
                                f"({exception_text(exc)}); dropped, the robot carries on"))
        return False


class CountsRefusals:
    """For a topic handler that keeps a `Refusals` in `self._refused`.

    The names the node's /diagnostics reads (refused_count, last_refusal) and the counts by reason.
    """

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
