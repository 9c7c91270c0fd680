"""Store events from simulated sites, for the site-learning tests (invented data)."""
from __future__ import annotations

import hashlib

import numpy as np

from helpaware_node.core.person import Result
from helpaware_node.fit.simulate_outcomes import SimulatedAsks, simulate_with_asks
from helpaware_node.fit.site_likelihood import SiteParams
from helpaware_node.store.base import AskEvent, StoredEvent

RESULTS = {0: Result.HELPED, 1: Result.DECLINED, 2: Result.NO_RESPONSE}


def key_of(label: str) -> str:
    """A 64-hex person key (as the store's HMAC gives) for a simulated person."""
    return hashlib.sha256(label.encode()).hexdigest()


def events(sim: SimulatedAsks, robots: tuple[str, ...] = ("r1",)
           ) -> tuple[list[StoredEvent], list[AskEvent]]:
    """Every ask as an AskEvent and every answered one as a StoredEvent, the robots taking
    turns (so some are peers' events), each robot's ids in sequence like a real store."""
    keys = [key_of(k) for k in sim.person_keys]
    seq = {r: 0 for r in robots}
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
