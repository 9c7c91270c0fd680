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

"""Input watchdog: which input topics have gone quiet, for how long, and when to say so.

A node whose middleware stopped delivering (a publisher writing into a dead peer's transport,
a perception process that hung, a remap to the wrong name) keeps running and deciding on
nothing.  This class makes that visible.  It is fed a note at each received message and asked,
at each status tick, for a status per topic; the caller turns the statuses into /diagnostics and
the changes into log lines.

- Time is passed in (seconds on one monotonic clock); nothing here reads a clock.
- A topic is silent when no message has arrived for longer than its limit; before its first
  message the silence is counted from the start of watching.  A limit of 0 switches the topic's
  warning off (its silence is still reported).
- A silence episode yields one change when it begins and one when it ends, so a log built on
  the changes says each once per episode.
Pure: no rclpy import.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable, Mapping, Optional


@dataclass(frozen=True)
class TopicStatus:
    topic: str
    silent_s: float                         # since the last message, or since watching began
    first_message_after_s: Optional[float]  # watching began -> first message (None: none yet)
    publishers: int                         # publishers matched, as the caller counted them
    warn: bool                              # silent for longer than the topic's limit


@dataclass(frozen=True)
class SilenceChange:
    topic: str
    began: bool          # True: the silence just went over the limit; False: it is over
    silence_s: float     # how long the topic had been silent (at the start, or in all)
    publishers: int
    heard: bool          # for an end: a message arrived (False: the limit was raised or cut)


class InputWatch:
    """Last-message times per topic and the silence episodes over each topic's limit."""

    def __init__(self, topics: Iterable[str], start_s: float) -> None:
        self.topics = tuple(topics)
        if len(set(self.topics)) != len(self.topics) or not self.topics:
            raise ValueError(f"topics: {self.topics!r} must be distinct and not empty")
        self.start_s = float(start_s)
        self._last_s: dict[str, Optional[float]] = dict.fromkeys(self.topics, None)
        self._first_s: dict[str, Optional[float]] = dict.fromkeys(self.topics, None)
        self._episode_from_s: dict[str, Optional[float]] = dict.fromkeys(self.topics, None)

    def note(self, topic: str, now_s: float) -> None:
        """Note that a message on `topic` arrived at `now_s`."""
        if topic not in self._last_s:
            raise KeyError(f"topic: {topic!r} is not watched (watched: {', '.join(self.topics)})")
        if self._first_s[topic] is None:
            self._first_s[topic] = now_s
        last = self._last_s[topic]
        self._last_s[topic] = now_s if last is None else max(last, now_s)

    def silent_since_s(self, topic: str) -> float:
        """Return the time silence is counted from: the last message, or the start of watching."""
        last = self._last_s[topic]
        return self.start_s if last is None else last

    def check(self, now_s: float, limits_s: Mapping[str, float],
              publishers: Mapping[str, int]) -> tuple[list[TopicStatus], list[SilenceChange]]:
        """Statuses of every watched topic at `now_s`.

        The episodes begun or ended since the last check.  `limits_s[topic]` is the silence limit
        in seconds (0 or missing: no warning); `publishers[topic]` the matched publisher count to
        report.
        """
        statuses, changes = [], []
        for topic in self.topics:
            since = self.silent_since_s(topic)
            silent_s = max(0.0, now_s - since)
            limit = float(limits_s.get(topic, 0.0) or 0.0)
            warn = limit > 0.0 and silent_s > limit
            count = int(publishers.get(topic, 0))
            first = self._first_s[topic]
            statuses.append(TopicStatus(topic, silent_s,
                                        None if first is None else max(0.0, first - self.start_s),
                                        count, warn))
            episode_from = self._episode_from_s[topic]
            if warn and episode_from is None:
                self._episode_from_s[topic] = since
                changes.append(SilenceChange(topic, True, silent_s, count, False))
            elif not warn and episode_from is not None:
                self._episode_from_s[topic] = None
                heard = since > episode_from
                length = (since if heard else now_s) - episode_from
                changes.append(SilenceChange(topic, False, max(0.0, length), count, heard))
        return statuses, changes


def warning_text(statuses: Iterable[TopicStatus]) -> str:
    """One line for /diagnostics naming each silent topic, its silence and its publishers."""
    parts = [f"{s.topic} silent {s.silent_s:.1f} s ({s.publishers} publisher"
             f"{'' if s.publishers == 1 else 's'} matched)" for s in statuses if s.warn]
    return "no input: " + "; ".join(parts) if parts else ""


def change_text(change: SilenceChange, limit_s: float) -> str:
    """Return the log line for one change (said once per episode)."""
    who = f"{change.publishers} publisher{'' if change.publishers == 1 else 's'} matched"
    if change.began:
        return (f"{change.topic}: no message for {change.silence_s:.1f} s ({who}, limit "
                f"{limit_s:g} s): /diagnostics WARN until one arrives")
    if change.heard:
        return f"{change.topic}: messages again after {change.silence_s:.1f} s of silence ({who})"
    return (f"{change.topic}: silence warning off after {change.silence_s:.1f} s without a "
            f"message (limit now {limit_s:g} s; {who})")
