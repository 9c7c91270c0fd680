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
