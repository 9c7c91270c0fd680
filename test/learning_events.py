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

"""Store events from simulated sites, for the site-learning tests (invented data)."""
from __future__ import annotations

import hashlib

from helpaware_node.core.person import Result
from helpaware_node.fit.simulate_outcomes import simulate_with_asks, SimulatedAsks
from helpaware_node.fit.site_likelihood import SiteParams
from helpaware_node.store.base import AskEvent, StoredEvent
import numpy as np

RESULTS = {0: Result.HELPED, 1: Result.DECLINED, 2: Result.NO_RESPONSE}


def key_of(label: str) -> str:
    """Return a 64-hex person key (as the store's HMAC gives) for a simulated person."""
    return hashlib.sha256(label.encode()).hexdigest()


def events(sim: SimulatedAsks, robots: tuple[str, ...] = ("r1",)
           ) -> tuple[list[StoredEvent], list[AskEvent]]:
    """Every ask as an AskEvent and every answered one as a StoredEvent.

    The robots taking turns (so some are peers' events), each robot's ids in sequence like a real
    store.
    """
    keys = [key_of(k) for k in sim.person_keys]
    seq = dict.fromkeys(robots, 0)
    outcomes, asks = [], []
    order = np.argsort(sim.ask_time_s, kind="stable")
    for n, i in enumerate(order):
        robot = robots[n % len(robots)]
        seq[robot] += 1
        key, t = keys[sim.ask_person[i]], float(sim.ask_time_s[i])
        asks.append(AskEvent(f"{robot}/{seq[robot]}", key, t, "door", f"need-{i}"))
        if sim.answered[i]:
            seq[robot] += 1
            outcomes.append(StoredEvent(f"{robot}/{seq[robot]}", key, t,
                                        RESULTS[int(sim.result[i])], float(sim.busyness[i]),
                                        float(sim.robot_load[i]), "door"))
    return outcomes, asks


def site(truth: SiteParams, people: int, asks_per_person: float, seed: int,
         unanswered: float = 0.15, robots: tuple[str, ...] = ("r1",)):
    sim = simulate_with_asks(truth, people, asks_per_person, seed, unanswered=unanswered)
    return sim, *events(sim, robots)


def session_across_a_change(learned_values: dict, needs: int = 40, change_at: int = 20,
                            seed: int = 2, strangers: bool = True):
    """Run a help session whose constants change at need `change_at`.

    A help session that decides `needs` needs, with the constants of `learned_values` put in force
    at need `change_at` (as the node does on a new revision). Returns (decision texts, outcome
    records (time_s, request id, person id, result), the store, the session, the learned model).
    Answers are drawn at random (invented). With the ask's lasting cost in the score, the robot
    prefers the stranger of each need to staff it will meet again.
    """
    import random

    from helpaware_node import wire
    from helpaware_node.core import DecisionConfig, HelpNeed, SiteModel
    from helpaware_node.fit.online import overlay
    from helpaware_node.session import HelpSession, SessionRules
    from helpaware_node.store import MemoryStore
    from session_people import Person

    file_model = SiteModel()
    config = DecisionConfig(interruption_weight_s=1.0, min_reask_interval_s=60.0,
                            max_asks_per_person_per_day=50, max_asks_per_hour=100)
    rules = SessionRules(max_asks_per_need=1)
    store = MemoryStore(robot_id="r1")
    s = HelpSession(store, file_model, config, rules, now_s=1000.0)
    learned = overlay(file_model, learned_values)
    docs, outcomes, source, rng = [], [], ("parameter_file", 0), random.Random(seed)
    staff = [Person(f"s{i}", 1.0 + i, busyness=0.1 * i) for i in range(5)]
    for k in range(needs):
        t = 1000.0 + 300.0 * k
        if k == change_at:
            s.set_parameters(learned, config, rules)
            source = ("learned", 1)
        # a stranger at each need (strangers=False: the staff alone, so the same people are
        # asked again and their asks have a history)
        s.people_seen(staff + ([Person(f"new{k}", 2.0)] if strangers else []), t,
                      complete_view=True)
        step = s.need_opened(HelpNeed(f"n{k}", "door", t, urgency=0.5), t)
        for out in step.decisions:
            docs.append((t, wire.decision_text(out.decision, out.robot_ask_times_s, s.model,
                                               config, "r1", source)))
            if out.decision.action == "ask":
                result = rng.choice(["helped", "declined", "no_response"])
                s.outcome(f"n{k}", out.decision.person_id, result, t + 10)
                outcomes.append((t + 10, f"n{k}", out.decision.person_id, result))
    return docs, outcomes, store, s, learned
