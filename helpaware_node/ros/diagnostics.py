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

"""/diagnostics: input rates, rejected documents with the last reason, asks, store state.

The input watchdog (silent topics).

`InputCounters` counts the node's own input topics; `decision_values` gathers every value the
node reports (inputs, fleet and privacy topics, session, store, parameters) in one place;
`WatchedInputs` adds the silence of the watched inputs.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

from diagnostic_msgs.msg import DiagnosticArray, DiagnosticStatus, KeyValue

from ..input_watch import change_text, InputWatch, warning_text

INPUTS = ("people", "task_status", "outcome", "navigation_status")


@dataclass
class InputCounters:
    """Per input topic: received and rejected since start, plus the last rejection reason."""

    received: dict = field(default_factory=lambda: dict.fromkeys(INPUTS, 0))
    rejected: dict = field(default_factory=lambda: dict.fromkeys(INPUTS, 0))
    last_reason: dict = field(default_factory=lambda: dict.fromkeys(INPUTS, ""))
    failed: dict = field(default_factory=lambda: dict.fromkeys(INPUTS, 0))   # handler errors
    statuses_skipped: int = 0       # navigation status entries beyond the bound looked at
    housekeeping_errors: int = 0    # a housekeeping pass that raised (contained, logged)
    _received_at_tick: dict = field(default_factory=lambda: dict.fromkeys(INPUTS, 0))
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


def side_inputs(node) -> list:
    """Return the fleet and privacy topics: refusals counted by their own handlers."""
    return [(name, part) for name, part in (("fleet_outcomes", getattr(node, "fleet", None)),
                                            ("privacy_request", getattr(node, "privacy", None)))
            if part is not None]


class SideRefusals:
    """New refusals on the fleet and privacy topics since the last status (its level)."""

    def __init__(self) -> None:
        self._seen = 0

    def new_since_tick(self, node) -> int:
        total = sum(part.refused_count for _, part in side_inputs(node))
        new, self._seen = max(total - self._seen, 0), total
        return new


def decision_values(node, rates: dict) -> dict:
    """Every value of the node's decision status, by key (docs/integration.md lists them)."""
    values: dict = {}
    counters = node.counters
    for k in INPUTS:
        values[f"{k}.rate_hz"] = f"{rates[k]:.2f}"
        values[f"{k}.received"] = counters.received[k]
        values[f"{k}.rejected"] = counters.rejected[k]
        values[f"{k}.last_rejection"] = counters.last_reason[k]
        values[f"{k}.handler_errors"] = counters.failed[k]
    values["navigation_status.entries_skipped"] = counters.statuses_skipped
    values["housekeeping_errors"] = counters.housekeeping_errors
    for name, part in side_inputs(node):
        values[f"{name}.rejected"] = part.refused_count
        values[f"{name}.last_rejection"] = part.last_refusal
        values.update(part.diagnostic_values())   # queue, refusals by reason, keys in force
    session, held, store = node.session, node.held, node.store
    values.update({
        "open_needs": len(session.needs), "pending_asks": len(session.pending),
        "expired_asks": session.expired_asks, "could_not_ask": session.could_not_ask,
        "decisions": session.decisions, "people_in_view": len(session.seen),
        "people_dropped_from_view": session.people_dropped,
        "people_known": len(session.memory.records), "people_evicted": session.memory.evicted,
        "clock_jumps_forward": session.clock_jumps_forward,
        "count_peer_asks": session.rules.count_peer_asks,
        "store": type(store).__name__ if store is not None else "closed",
        "store_ok": session.status.ok, "store_last_error": session.status.error,
        "store_unsaved_outcomes": held.waiting,
        "store_unsaved_dropped": held.dropped,
        "asking_paused_for_store": bool(held.waiting),
        "qos_incompatible_events": counters.qos_incompatible,
        "parameters_rejected": node.params.rejected,
        "parameters_last_rejection": node.params.last_rejection,
        "params_hash": node.params_hash(),
        "log.lines": node.log_lines.lines, "log.lines_held_back": node.log_lines.held_back,
    })
    if getattr(node, "learning", None) is not None:   # constants in force, source, last refit
        values.update(node.learning.diagnostic_values())
    # what the per-document log lines counted, by kind (rejections, session notes)
    values.update({f"log.count.{kind}": n for kind, n in sorted(node.log_lines.counts.items())})
    if store is not None and hasattr(store, "counts"):
        try:
            values.update({f"store.{k}": v for k, v in store.counts().items()})
        except Exception as exc:  # report, never stop the node over a status query
            values["store.counts_error"] = str(exc)[:200]
    elif store is not None:
        values["store.persons"] = len(store.keys())
    return values


def silence_limits_s(settings) -> dict:
    """Return the silence limit of each watched topic, from the node settings (0: no warning)."""
    return {"people": settings.people_silence_warn_s,
            "task_status": settings.task_status_silence_warn_s}


class WatchedInputs:
    """The input watchdog on the node (the logic is helpaware_node/input_watch.py).

    Publisher counts from the node's own subscriptions, so remaps count the topic really
    subscribed; one log line when a silence begins and one when it ends; WARN in /diagnostics
    meanwhile.
    """

    def __init__(self, subscriptions: Mapping[str, Any], logger, start_s: float) -> None:
        self._subscriptions = dict(subscriptions)
        self._logger = logger
        self.watch = InputWatch(self._subscriptions, start_s)

    def note(self, topic: str, now_s: float) -> None:
        self.watch.note(topic, now_s)

    def _publishers(self) -> dict:
        counts = {}
        for topic, sub in self._subscriptions.items():
            try:
                counts[topic] = sub.get_publisher_count()
            except Exception:  # noqa: BLE001 - a subscription destroyed at shutdown
                counts[topic] = 0
        return counts

    def report(self, now_s: float, limits_s: Mapping[str, float], values: dict, level,
               message: str) -> tuple:
        """Add `<topic>.publishers`, `.silent_s`, `.first_message_after_s` to `values`.

        Log the episodes begun or ended; return the level and message with any silence in them.
        """
        statuses, changes = self.watch.check(now_s, limits_s, self._publishers())
        for change in changes:
            text = change_text(change, limits_s.get(change.topic, 0.0))
            if change.began:
                self._logger.warning(text)
            else:
                self._logger.info(text)
        for st in statuses:
            values[f"{st.topic}.publishers"] = st.publishers
            values[f"{st.topic}.silent_s"] = f"{st.silent_s:.1f}"
            values[f"{st.topic}.first_message_after_s"] = (
                "" if st.first_message_after_s is None else f"{st.first_message_after_s:.2f}")
        warning = warning_text(statuses)
        if not warning:
            return level, message
        if level == DiagnosticStatus.OK:
            return DiagnosticStatus.WARN, warning[:250]
        return level, f"{message}; {warning}"[:250]
