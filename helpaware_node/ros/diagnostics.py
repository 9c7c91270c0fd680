"""/diagnostics: input rates, rejected documents with the last reason, asks, store state."""
from __future__ import annotations

from dataclasses import dataclass, field

from diagnostic_msgs.msg import DiagnosticArray, DiagnosticStatus, KeyValue

INPUTS = ("people", "task_status", "outcome", "navigation_status")


@dataclass
class InputCounters:
    """Per input topic: received and rejected since start, plus the last rejection reason."""

    received: dict = field(default_factory=lambda: {k: 0 for k in INPUTS})
    rejected: dict = field(default_factory=lambda: {k: 0 for k in INPUTS})
    last_reason: dict = field(default_factory=lambda: {k: "" for k in INPUTS})
    _received_at_tick: dict = field(default_factory=lambda: {k: 0 for k in INPUTS})
    _rejected_at_tick: int = 0
    qos_incompatible: int = 0

    def reject(self, topic: str, reason: str) -> None:
        self.rejected[topic] += 1
        self.last_reason[topic] = reason[:200]

    def rates_since_tick(self, period_s: float) -> dict:
        out = {k: (self.received[k] - self._received_at_tick[k]) / max(period_s, 1e-9)
               for k in INPUTS}
        self._received_at_tick = dict(self.received)
        return out

    def new_rejections_since_tick(self) -> int:
        total = sum(self.rejected.values())
        new, self._rejected_at_tick = total - self._rejected_at_tick, total
        return new


def status_array(name: str, hardware_id: str, stamp, values: dict, level: int,
                 message: str) -> DiagnosticArray:
    st = DiagnosticStatus()
    st.level = level            # DiagnosticStatus.OK / WARN / ERROR constants (a byte)
    st.name = name
    st.hardware_id = hardware_id
    st.message = message
    st.values = [KeyValue(key=str(k), value=str(v)) for k, v in values.items()]
    arr = DiagnosticArray()
    arr.header.stamp = stamp
    arr.status = [st]
    return arr


def level_for(new_rejections: int, qos_incompatible: int, store_ok: bool) -> tuple[int, str]:
    if not store_ok:
        return DiagnosticStatus.ERROR, "store failing: outcomes are not being learned"
    if qos_incompatible:
        return DiagnosticStatus.WARN, "incompatible QoS on a topic (see values)"
    if new_rejections:
        return DiagnosticStatus.WARN, f"{new_rejections} input document(s) rejected"
    return DiagnosticStatus.OK, "running"
