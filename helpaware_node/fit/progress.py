"""Plain-text progress lines on stderr for long fits (no colour, no cursor tricks off a tty)."""
from __future__ import annotations

import sys
import time


class Progress:

    def __init__(self, label: str, enabled: bool = True, every_s: float = 1.0, stream=None):
        self.label = label
        self.enabled = enabled
        self.every_s = every_s
        self.stream = stream if stream is not None else sys.stderr
        self.start = time.monotonic()
        self.last = -1e9
        self.count = 0

    def step(self, text: str) -> None:
        self.count += 1
        now = time.monotonic()
        if not self.enabled or now - self.last < self.every_s:
            return
        self.last = now
        self.stream.write(f"{self.label}: iteration {self.count:4d}  {text}  "
                          f"({now - self.start:.1f} s)\n")
        self.stream.flush()

    def done(self, text: str) -> None:
        if self.enabled:
            self.stream.write(f"{self.label}: done after {self.count} iterations  {text}  "
                              f"({time.monotonic() - self.start:.1f} s)\n")
            self.stream.flush()
