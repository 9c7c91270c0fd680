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

"""A bag of an invented night shift made through the core, for tests, the bench and the demo.

Every decision is a real `core.policy.decide` result encoded by `wire`, so a review of this bag
and its replay exercise the same documents the node publishes.  Person ids are hashed with a
fixed invented site key before anything is written, as `helpaware record` does by default.
"""
from __future__ import annotations

from dataclasses import dataclass
import random
from typing import Optional

from . import documents as rw
from ..bag import BagWriter, DIAGNOSTIC_ARRAY_TYPE, MARKER_ARRAY_TYPE, STRING_TYPE, typestore
from ..bag.person_ids import HASHED_MARK
from ..core import (
    candidate_from_record,
    decide,
    DecisionConfig,
    HelpNeed,
    note_ask,
    note_candidate,
    note_outcome,
    OutcomeEvent,
    PersonRecord,
    Result,
    SiteModel,
)
from ..core.context import context_factor
from ..store.base import person_key

SAMPLE_SITE_KEY = b"invented-night-shift-site-key"
KINDS = ("door", "elevator", "door", "handover", "elevator", "blocked_corridor")
ACTIVITIES = ("charting", "idle", "walking_fast", "on_call", "with_patient")


@dataclass
class SampleCounts:
    decisions: int = 0
    asks: int = 0
    outcomes: int = 0
    needs_opened: int = 0
    people_messages: int = 0


def _diagnostics_bytes(stamp_s: float) -> bytes:
    store = typestore()
    T = store.types
    sec = int(stamp_s)
    header = T["std_msgs/msg/Header"](stamp=T["builtin_interfaces/msg/Time"](
        sec=sec, nanosec=int((stamp_s - sec) * 1e9)), frame_id="")
    status = T["diagnostic_msgs/msg/DiagnosticStatus"](
        level=0, name="helpaware: decisions", message="ok", hardware_id="",
        values=[T["diagnostic_msgs/msg/KeyValue"](key="pending_asks", value="0")])
    msg = T[DIAGNOSTIC_ARRAY_TYPE](header=header, status=[status])
    return store.serialize_cdr(msg, DIAGNOSTIC_ARRAY_TYPE)


def _markers_bytes() -> bytes:
    store = typestore()
    msg = store.types[MARKER_ARRAY_TYPE](markers=[])
    return store.serialize_cdr(msg, MARKER_ARRAY_TYPE)


def write_sample_bag(path: str, needs: int = 40, people: int = 12, seed: int = 3,
                     model: Optional[SiteModel] = None, config: Optional[DecisionConfig] = None,
                     people_per_need: int = 5, answer_every: int = 1,
                     topics: tuple[str, ...] = ("decision", "people", "task_status", "outcome",
                                                "markers", "/diagnostics"),
                     extra_people_messages: int = 0, truncate_outcomes: bool = False,
                     start_s: float = 1_700_000_000.0) -> SampleCounts:
    """Write an invented shift with `needs` help needs; returns what was written.

    `answer_every` = 1: every ask gets an outcome; k > 1: every k-th ask gets none, so it
    expires.  `extra_people_messages` pads the people topic (bench).
    """
    model = model or SiteModel()
    config = config or DecisionConfig()
    rng = random.Random(seed)
    staff = [f"staff-{i:02d}" for i in range(people)]
    truth = {p: rng.uniform(0.1, 0.95) for p in staff}
    key = {p: person_key(SAMPLE_SITE_KEY, p) for p in staff}
    records: dict[str, PersonRecord] = {}
    robot_asks: list[float] = []
    counts = SampleCounts()
    asks_made = 0
    with BagWriter(path, custom_data={HASHED_MARK: "hmac-sha256"}) as bag:
        def name(t: str) -> str:      # names as a node in the root namespace has them
            return t if t.startswith("/") else "/" + t

        for t in topics:
            bag.add_topic(name(t), MARKER_ARRAY_TYPE if t == "markers" else
                          DIAGNOSTIC_ARRAY_TYPE if t == "/diagnostics" else STRING_TYPE)

        def emit(topic: str, t_s: float, text: str) -> None:
            if topic in topics:
                bag.write_string(name(topic), int(round(t_s * 1e9)), text)

        now = start_s
        pad_per_need = extra_people_messages // max(needs, 1)
        for k in range(needs):
            now += rng.uniform(120.0, 900.0)
            seen = rng.sample(staff, min(people_per_need, people))
            obs = [(key[p], rng.random() ** 1.5, rng.uniform(0.5, 10.0), rng.choice(ACTIVITIES))
                   for p in seen]
            if pad_per_need:
                padding = rw.people_document(obs, now - 1.0)
            for j in range(pad_per_need):
                emit("people", now - 1.0 + j * 1e-6, padding)
            emit("people", now - 0.5, rw.people_document(obs, now - 0.5))
            counts.people_messages += pad_per_need + 1
            need = HelpNeed(f"need-{k:04d}", KINDS[k % len(KINDS)], now,
                            urgency=round(rng.random() * 0.6, 2))
            emit("task_status", now, rw.task_status_document(need, "open", now))
            counts.needs_opened += 1
            cands = []
            for hk, busy, dist, act in obs:
                rec = records.setdefault(hk, PersonRecord.new(model))
                cands.append(candidate_from_record(hk, rec, now, model, dist, now - 0.5, busy,
                                                   act))
            decision = decide(need, cands, now, tuple(robot_asks), model, config)
            emit("decision", now, rw.decision_document(decision, tuple(robot_asks), model, config))
            counts.decisions += 1
            for hk, *_ in obs:
                records[hk] = note_candidate(records[hk], now)
            if "markers" in topics:
                bag.write("/markers", int(round(now * 1e9)) + 1, _markers_bytes())
            if "/diagnostics" in topics:
                bag.write("/diagnostics", int(round(now * 1e9)) + 2, _diagnostics_bytes(now))
            if decision.action == "ask":
                counts.asks += 1
                asks_made += 1
                i = decision.person_index
                ev = decision.evaluation
                assert decision.person_id is not None   # an ask names its person
                hk = decision.person_id
                raw = next(p for p in staff if key[p] == hk)
                records[hk] = note_ask(records[hk], now, model)
                robot_asks.append(now)
                if answer_every > 1 and asks_made % answer_every == 0:
                    continue   # no outcome: the ask expires
                c = context_factor(ev.busyness[i], ev.ask_load[i], model.k_busy, model.k_load)
                u = rng.random()
                result = (Result.HELPED if u < c * truth[raw] else
                          Result.NO_RESPONSE if u > 0.9 else Result.DECLINED)
                event = OutcomeEvent(now, result, float(ev.busyness[i]), float(ev.ask_load[i]),
                                     event_id=f"sample/{k:06d}")
                records[hk] = note_outcome(records[hk], event, model)
                emit("outcome", now + 30.0, rw.outcome_document(need.request_id, hk, result,
                                                                now + 30.0))
                counts.outcomes += 1
                emit("task_status", now + 31.0, rw.task_status_document(need, "resolved",
                                                                        now + 31.0))
            else:
                emit("task_status", now + 60.0, rw.task_status_document(need, "resolved",
                                                                        now + 60.0))
    return counts
