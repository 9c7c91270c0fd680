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

"""RViz markers: one view-facing text per person in view; people who left are deleted."""
from __future__ import annotations

from typing import Iterable, Optional

from visualization_msgs.msg import Marker, MarkerArray

NAMESPACE = "helpaware_people"


class MarkerIds:
    """Stable small integer ids per perceived person (marker ids must be int32)."""

    def __init__(self) -> None:
        self._ids: dict[str, int] = {}
        self._next = 1

    def get(self, person_id: str) -> int:
        if person_id not in self._ids:
            self._ids[person_id] = self._next
            self._next = self._next + 1 if self._next < 2**31 - 2 else 1
        return self._ids[person_id]

    def drop(self, person_id: str) -> Optional[int]:
        return self._ids.pop(person_id, None)


def person_marker(marker_id: int, frame_id: str, stamp, position, text: str,
                  lifetime_s: float) -> Marker:
    m = Marker()
    m.header.frame_id = frame_id
    m.header.stamp = stamp
    m.ns = NAMESPACE
    m.id = marker_id
    m.type = Marker.TEXT_VIEW_FACING
    m.action = Marker.ADD
    m.pose.position.x, m.pose.position.y, m.pose.position.z = (float(v) for v in position)
    m.pose.orientation.w = 1.0
    m.scale.z = 0.25          # text height, metres
    m.color.r, m.color.g, m.color.b, m.color.a = 1.0, 1.0, 1.0, 1.0
    m.text = text
    m.lifetime.sec = int(lifetime_s)
    m.lifetime.nanosec = int((lifetime_s - int(lifetime_s)) * 1e9)
    return m


def delete_marker(marker_id: int, frame_id: str, stamp) -> Marker:
    m = Marker()
    m.header.frame_id = frame_id
    m.header.stamp = stamp
    m.ns = NAMESPACE
    m.id = marker_id
    m.action = Marker.DELETE
    return m


def marker_array(markers: Iterable[Marker]) -> MarkerArray:
    arr = MarkerArray()
    arr.markers = list(markers)
    return arr


class PersonMarkers:
    """The markers of the people in view.

    Belief mean and what the last decision did with each ("asked" / "passed over"); people who left
    get a delete.
    """

    def __init__(self) -> None:
        self._ids = MarkerIds()
        self._marked: set[str] = set()
        self._last_action: dict[str, str] = {}    # perceived id -> "asked" / "passed over"
        # one Marker per person in view, updated in place at each period: building a Marker
        # message costs more than filling in its changing fields
        self._markers: dict[str, Marker] = {}

    def note_decision(self, decision) -> None:
        for cand in decision.evaluation.candidates:
            self._last_action[cand.person_id] = "passed over"
        if decision.action == "ask":
            self._last_action[decision.person_id] = "asked"

    def update(self, seen: dict, mean_of, stamp, lifetime_s: float) -> Optional[MarkerArray]:
        """`seen`: perceived id -> session.Seen; `mean_of(key)`: the belief mean now."""
        markers = []
        for pid, s in seen.items():
            pos = s.person.position or (s.person.distance_m, 0.0, 0.0)
            pos = (pos[0], pos[1], pos[2] + 2.0)   # above the head
            text = f"w={mean_of(s.key):.2f} {self._last_action.get(pid, '')}".strip()
            m = self._markers.get(pid)
            if m is None or m.header.frame_id != s.frame_id:
                m = self._markers[pid] = person_marker(self._ids.get(pid), s.frame_id, stamp,
                                                       pos, text, lifetime_s)
            else:
                m.header.stamp = stamp
                p = m.pose.position
                p.x, p.y, p.z = float(pos[0]), float(pos[1]), float(pos[2])
                m.text = text
                m.lifetime.sec = int(lifetime_s)
                m.lifetime.nanosec = int((lifetime_s - int(lifetime_s)) * 1e9)
            markers.append(m)
        for pid in self._marked - set(seen):
            mid = self._ids.drop(pid)
            self._last_action.pop(pid, None)
            self._markers.pop(pid, None)
            if mid is not None:
                markers.append(delete_marker(mid, "base_link", stamp))
        self._marked = set(seen)
        return marker_array(markers) if markers else None

    def reset(self, seen: dict) -> None:
        """Nobody listens: build nothing.

        Keep only what the people in view need (a late subscriber gets fresh markers; the ones
        shown before expire by their lifetime).
        """
        self._marked.clear()
        self._markers.clear()
        for pid in [p for p in self._last_action if p not in seen]:
            del self._last_action[pid]
