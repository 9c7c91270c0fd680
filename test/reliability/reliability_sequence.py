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

"""A seeded random run of help needs through core.policy.decide, with its own ask ledger.

The ledger keeps every ask ever made (never pruned), so the limits are checked against the
full history rather than against the core's own pruned memory.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import os

from helpaware_node.core.model import DecisionConfig, SiteModel
from helpaware_node.core.person import (
    keep_recent_asks,
    note_ask,
    note_candidate,
    note_outcome,
    OutcomeEvent,
    PersonRecord,
    Result,
)
from helpaware_node.core.policy import candidate_from_record, decide, HelpNeed
import numpy as np

SOAK = os.environ.get("HELPAWARE_SOAK", "") not in ("", "0")


def scaled(ci_count: int, soak_count: int) -> int:
    """Return the CI size, or the soak size when HELPAWARE_SOAK is set (make soak)."""
    return soak_count if SOAK else ci_count


@dataclass
class Ledger:
    person_asks_s: dict[str, list[float]] = field(default_factory=dict)
    robot_asks_s: list[float] = field(default_factory=list)
    asks_of_opted_out: int = 0
    decisions: int = 0
    exclusions: dict[str, int] = field(default_factory=dict)
    ask_steps: list[tuple[int, str]] = field(default_factory=list)   # (decision index, person)


def run_sequence(rng: np.random.Generator, n_decisions: int, times_s, model: SiteModel,
                 config: DecisionConfig, n_people: int = 25, opt_out_share: float = 0.2,
                 on_decision=None) -> Ledger:
    """Drive `n_decisions` help needs at the given times (any order: clocks may jump)."""
    people = [f"p{i:03d}" for i in range(n_people)]
    opted_out = {p for p in people if rng.random() < opt_out_share}
    records = {p: PersonRecord.new(model) for p in people}
    robot_memory: list[float] = []
    ledger = Ledger()
    results = list(Result)
    for k in range(n_decisions):
        now_s = float(times_s[k])
        n_cand = int(rng.integers(0, 7))
        chosen = rng.choice(n_people, size=n_cand, replace=False)
        cands = []
        for j in chosen:
            pid = people[j]
            records[pid] = note_candidate(records[pid], now_s)
            cands.append(candidate_from_record(
                pid, records[pid], now_s, model,
                distance_m=float(rng.uniform(0.0, 10.0)),
                observed_at_s=now_s - float(rng.uniform(0.0, 4.0)),
                busyness=float(rng.uniform(0.0, 1.0)) if rng.random() < 0.8 else None,
                activity="with_patient" if rng.random() < 0.05 else "",
                opted_out=pid in opted_out))
        need = HelpNeed(request_id=f"r{k}", kind=str(rng.choice(["door", "lift", "item"])),
                        opened_at_s=now_s, urgency=float(rng.uniform(0.0, 1.0)))
        decision = decide(need, cands, now_s, robot_memory, model, config)
        ledger.decisions += 1
        for excl in decision.evaluation.exclusions:
            if excl is not None:
                ledger.exclusions[excl.value] = ledger.exclusions.get(excl.value, 0) + 1
        if on_decision is not None:
            on_decision(decision, now_s)
        if decision.action != "ask":
            continue
        pid = decision.person_id
        if pid in opted_out:
            ledger.asks_of_opted_out += 1
        ledger.person_asks_s.setdefault(pid, []).append(now_s)
        ledger.robot_asks_s.append(now_s)
        ledger.ask_steps.append((k, pid))
        # pruned the way the node prunes it (core keep_recent_asks): asks 'in the future'
        # after a backward jump stay, and so do the newest max_asks_per_hour
        robot_memory = list(keep_recent_asks(robot_memory, now_s, 3600.0,
                                             config.max_asks_per_hour)) + [now_s]
        load = float(decision.evaluation.ask_load[decision.person_index])
        records[pid] = note_ask(records[pid], now_s, model)
        event = OutcomeEvent(time_s=now_s, result=results[int(rng.integers(0, len(results)))],
                             busyness=float(decision.evaluation.busyness[decision.person_index]),
                             ask_load=load, event_id=f"robot1-{k}")
        records[pid] = note_outcome(records[pid], event, model)
    return ledger


def retimed(ledger: Ledger, times_s) -> Ledger:
    """Return the same asks at other times (e.g. real elapsed time instead of a jumpy clock)."""
    out = Ledger(asks_of_opted_out=ledger.asks_of_opted_out, decisions=ledger.decisions)
    for k, pid in ledger.ask_steps:
        out.person_asks_s.setdefault(pid, []).append(float(times_s[k]))
        out.robot_asks_s.append(float(times_s[k]))
    return out


def limit_breaches(ledger: Ledger, config: DecisionConfig) -> dict[str, int]:
    """Count breaches of each limit, judged in the order the asks were made.

    An ask at t_k breaches the re-ask interval if any earlier-made ask j of the same person
    has t_k - t_j < interval (a 'future' ask after a backward clock jump counts as recent);
    the daily and hourly caps count earlier-made asks with t_k - t_j under a day / an hour.
    """
    breaches = {"reask_interval": 0, "person_daily_cap": 0, "robot_hourly_cap": 0}
    for times in ledger.person_asks_s.values():
        t = np.asarray(times)
        for k in range(1, len(t)):
            gaps = t[k] - t[:k]
            breaches["reask_interval"] += int(np.any(gaps < config.min_reask_interval_s))
            breaches["person_daily_cap"] += int(np.sum(gaps < 86400.0)
                                                >= config.max_asks_per_person_per_day)
    t = np.asarray(ledger.robot_asks_s)
    for k in range(1, len(t)):
        breaches["robot_hourly_cap"] += int(np.sum(t[k] - t[:k] < 3600.0)
                                            >= config.max_asks_per_hour)
    return breaches
