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

"""A short scripted night shift run through the core only: each decision and its rationale.

Invented scenario (a teaching hospital's night shift, DESIGN.md section 9): a supply robot
needs badge doors and elevators; a handful of staff pass by.  Outcomes come from fixed
invented willingness values with a seeded random draw, so every run prints the same story.
"""
from __future__ import annotations

from dataclasses import dataclass
import random

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
from ..text_table import fmt, render_table


@dataclass
class Staff:
    person_id: str
    true_willingness: float      # invented ground truth, never seen by the decision


STAFF = [Staff("nurse-ward3-a", 0.85), Staff("porter-b", 0.6), Staff("doctor-c", 0.25),
         Staff("nurse-ward5-d", 0.7)]

# (time s, request kind, urgency, [(person, busyness, distance m, activity)])
SCRIPT = [
    (60.0, "door", 0.0,
     [("nurse-ward3-a", 0.2, 2.5, "charting"), ("doctor-c", 0.6, 4.0, "walking_fast")]),
    (420.0, "elevator", 0.3,
     [("porter-b", 0.1, 3.0, "idle"), ("nurse-ward3-a", 0.3, 6.0, "charting")]),
    (900.0, "door", 0.0,
     [("nurse-ward3-a", 0.1, 1.5, "idle"), ("nurse-ward5-d", 0.95, 2.0, "with_patient")]),
    (1500.0, "handover", 0.5, [("doctor-c", 0.2, 2.0, "idle"), ("porter-b", 0.4, 5.0, "on_call")]),
    (2400.0, "door", 0.0,
     [("nurse-ward3-a", 0.2, 2.0, "charting"), ("porter-b", 0.2, 2.5, "idle")]),
    (3300.0, "elevator", 0.0, [("doctor-c", 0.3, 1.0, "charting")]),
    (4200.0, "door", 0.0,
     [("nurse-ward5-d", 0.1, 2.0, "idle"), ("nurse-ward3-a", 0.1, 3.0, "idle")]),
]


def run(seed: int = 7, out=print) -> list[dict]:
    model = SiteModel()
    config = DecisionConfig()
    truth = {s.person_id: s.true_willingness for s in STAFF}
    records: dict[str, PersonRecord] = {}
    robot_asks: list[float] = []
    rng = random.Random(seed)
    summary = []
    out("Scripted night shift through the decision core (invented data; willingness is hidden)\n")
    for k, (now, kind, urgency, seen) in enumerate(SCRIPT, start=1):
        need = HelpNeed(f"need-{k:02d}", kind, now, urgency=urgency)
        cands = []
        for pid, busy, dist, activity in seen:
            rec = records.setdefault(pid, PersonRecord.new(model))
            cands.append(candidate_from_record(pid, rec, now, model, dist, now, busy, activity))
        decision = decide(need, cands, now, robot_asks, model, config)
        for pid, *_ in seen:
            records[pid] = note_candidate(records[pid], now)
        rows = []
        for r in decision.rationale():
            rows.append([r["person_id"], fmt(r["mean"]), f"{r['a']:.2f}/{r['b']:.2f}",
                         fmt(r["busyness"]),
                         fmt(r["c"]), fmt(r["p"]), fmt(r["advantage_s"], 1), fmt(r["voi_s"], 2),
                         fmt(r["future_requests"], 1), fmt(r["score_s"], 1), r["excluded"] or "-"])
        out(f"[t={now:6.0f} s] {need.request_id} {kind} (urgency {urgency:.1f}): "
            f"continuing would cost about {decision.evaluation.continue_cost_s:.0f} s")
        out(render_table(["person", "mean", "a/b", "busy", "c", "p", "A s", "VOI s", "N", "Q s",
                          "excluded"],
                         rows, [False] + [True] * 9 + [False]))
        result = None
        if decision.action == "ask":
            # an ask names its person
            assert decision.person_id is not None and decision.person_index is not None
            pid = decision.person_id
            i = decision.person_index
            ev = decision.evaluation
            c = context_factor(ev.busyness[i], ev.ask_load[i], model.k_busy, model.k_load)
            result = Result.HELPED if rng.random() < c * truth[pid] else Result.DECLINED
            event = OutcomeEvent(now, result, float(ev.busyness[i]), float(ev.ask_load[i]),
                                 event_id=f"demo/{k:04d}")
            records[pid] = note_outcome(note_ask(records[pid], now, model), event, model)
            robot_asks.append(now)
            out(f"  -> ASK {pid}: {result.value}; belief now "
                f"Beta({records[pid].belief.a:.2f}, {records[pid].belief.b:.2f})\n")
        else:
            out(f"  -> CONTINUE ({decision.why})\n")
        summary.append({"request_id": need.request_id, "action": decision.action,
                        "person_id": decision.person_id,
                        "result": result.value if result else None})
    asks = sum(1 for s in summary if s["action"] == "ask")
    helps = sum(1 for s in summary if s["result"] == "helped")
    out(f"{len(summary)} help needs, {asks} asks, {helps} helped. "
        "The node only decides whether to ask; it never moves the robot.")
    return summary
