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
