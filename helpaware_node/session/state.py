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

"""The plain values a help session keeps and returns.

People in view, open needs, pending asks, its rules, and the Step each event gives back to its
driver.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Optional

from ..core import Decision, HelpNeed
from ..core.model import CoreInputError
from ..store.base import AnyEvent, AskEvent
from ..wire import MAX_CANDIDATES

IN_VIEW_EXTRA_S = 5.0          # people stay listed a little past the staleness limit
MAX_OPEN_NEEDS = 1000          # a behaviour layer that never resolves: the oldest need goes
MAX_PEOPLE_IN_MEMORY = 20_000  # person records kept in memory; beliefs and asks stay in the store
MAX_GOALS_REMEMBERED = 1000    # navigation goals whose abort was already handled
# entries of one navigation status array looked at (its last; a server lists a finished goal
# only for its result timeout)
MAX_GOAL_STATUSES = 1000
MAX_PEOPLE_IN_VIEW = MAX_CANDIDATES   # people in view at once: a decision's candidates
# of a decision document's MAX_DOCUMENT_BYTES, kept for all but its candidates (need, the
# robot's 1 000 ask times, parameters)
DECISION_OTHER_BYTES = 64_000
STORE_UNAVAILABLE = "store_unavailable"   # decision policy while the store refuses writes


class SessionInputError(CoreInputError):
    """An event the session refuses (names the field): the session's state is unchanged."""


@dataclass(frozen=True)
class SessionRules:
    """The session's own settings (the node's parameters of the same names)."""

    max_asks_per_need: int = 2          # asks at one need before the robot carries on alone
    pending_ask_timeout_s: float = 120.0  # an ask without outcome expires (no belief change)
    asking_enabled: bool = True         # operator switch: false means always continue
    count_peer_asks: bool = True        # peers' asks count for the per-person limits and load
    max_open_needs: int = MAX_OPEN_NEEDS
    max_people_in_memory: int = MAX_PEOPLE_IN_MEMORY


@dataclass
class Seen:
    """A person in view: `person` has person_id, distance_m.

    Busyness and activity (wire.SeenPerson, the simulator's SeenPerson); `frame_id` is the
    driver's.
    """

    person: Any
    key: str
    observed_at_s: float
    frame_id: str = ""


@dataclass
class OpenNeed:
    need: HelpNeed
    asks: int = 0                 # asks made for it, before a restart included
    served: bool = False          # someone helped: no further decisions for it
    waiting_for_clock: bool = False
    candidates: set[str] = field(default_factory=set)   # person keys counted as its candidates


@dataclass
class PendingAsk:
    request_id: str
    person_id: str
    key: str
    asked_at_s: float
    busyness: float
    ask_load: float
    kind: str
    expires_at_s: float


@dataclass(frozen=True)
class Note:
    """A line for the driver's log.

    `kind` names what it reports (the node counts notes by kind and logs each kind a bounded number
    of times: a document may cause a note, and documents can come at any rate); `throttle_s` > 0:
    the period of a repeated condition.
    """

    level: str                    # "info", "warning" or "error"
    text: str
    throttle_s: float = 0.0
    kind: str = ""                # e.g. unknown_request, ask_expired, store_refused


@dataclass(frozen=True)
class DecisionOut:
    """A decision to publish, with what it was made on and the ask event stored for it.

    A decision to publish, with the robot's recent asks it was made on (the document's
    robot_ask_times_s) and the ask event stored for it, if it asks.
    """

    decision: Decision
    robot_ask_times_s: tuple[float, ...]
    ask: Optional[AskEvent] = None


@dataclass
class Step:
    """What one event gives back.

    Decisions to publish (in order), events stored here to share with the fleet, notes for the log.
    """

    decisions: list[DecisionOut] = field(default_factory=list)
    share: list[AnyEvent] = field(default_factory=list)
    notes: list[Note] = field(default_factory=list)

    def note(self, level: str, kind: str, text: str, throttle_s: float = 0.0) -> None:
        self.notes.append(Note(level, text, throttle_s, kind))

    def extend(self, other: "Step") -> None:
        """Another step's output after this one's."""
        self.decisions += other.decisions
        self.share += other.share
        self.notes += other.notes
