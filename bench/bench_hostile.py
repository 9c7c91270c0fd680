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

"""What hostile inputs cost the help session now.

Beside what they cost before the bounds (issue 14 items 3 and 4), in one run, on a MemoryStore (no
ROS, no disk).

- People piled up from successive documents: 500 per document, all in view. The session now
  keeps the nearest 500 (wire.MAX_CANDIDATES) that fit in one decision document; before, every
  one was a candidate. Beside each bounded decision: core.policy.decide over all of them, the
  cost the unbounded pile had (the same decision code path), with the size of its document.
- One navigation status array of N aborted goals: the session looks at its last 1 000 entries
  and opens at most one need; before, each aborted goal opened a need and a decision (here
  need_opened once per goal, as the old loop did through goal_aborted).
"""
from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from helpaware_node import wire  # noqa: E402
from helpaware_node.core import decide, DecisionConfig, HelpNeed, SiteModel  # noqa: E402
from helpaware_node.session import HelpSession, SessionRules  # noqa: E402
from helpaware_node.store import MemoryStore  # noqa: E402
from helpaware_node.text_table import render_table  # noqa: E402

MODEL = SiteModel()
CONFIG = DecisionConfig(max_distance_m=1e6)
T0 = 1_800_000_000.0


class Person:

    def __init__(self, pid: str, distance_m: float) -> None:
        self.person_id, self.distance_m, self.busyness, self.activity = pid, distance_m, 0.2, ""


def session() -> HelpSession:
    return HelpSession(MemoryStore(robot_id="bench"), MODEL, CONFIG, SessionRules(), now_s=T0)


def published_bytes(out) -> int:
    doc = wire.decision_to_document(out.decision, out.robot_ask_times_s, None, None, "bench",
                                    check=False)
    return len(wire.fast_text(doc, MODEL, CONFIG).encode("utf-8"))


def pile(total: int, rounds: int) -> tuple:
    """(bounded candidates, ms, bytes, unbounded candidates, ms, bytes): medians of rounds.

    Each time is the decision and its document text, as the node makes both.
    """
    crowd = [Person(f"p{i}", 1.0 + (i * 7919 % total) * 0.001) for i in range(total)]
    bounded_ms, unbounded_ms = [], []
    for r in range(rounds):
        s = session()
        for k in range(0, total, 500):          # one document of 500 after another
            s.people_seen(crowd[k:k + 500], T0 + 0.01 * k / 500)
        now = T0 + 1.0
        t = time.perf_counter()
        [out] = s.need_opened(HelpNeed(f"n{r}", "door", now, urgency=1.0), now).decisions
        size = published_bytes(out)
        bounded_ms.append((time.perf_counter() - t) * 1e3)
        # the unbounded pile: every person a candidate, through the same core.decide
        t = time.perf_counter()
        cands = list(_candidates(s, crowd, now))
        full = decide(HelpNeed(f"u{r}", "door", now, urgency=1.0), cands, now, [], MODEL, CONFIG)
        doc = wire.decision_to_document(full, (), None, None, "bench", check=False)
        unbounded_bytes = len(wire.fast_text(doc, MODEL, CONFIG).encode("utf-8"))
        unbounded_ms.append((time.perf_counter() - t) * 1e3)
    return (len(out.decision.evaluation.candidates), statistics.median(bounded_ms), size,
            len(cands), statistics.median(unbounded_ms), unbounded_bytes)


def _candidates(s: HelpSession, crowd, now):
    from helpaware_node.core import candidate_from_record
    for p in crowd:
        rec = s.memory.record_for(s.store.key_for(p.person_id))
        yield candidate_from_record(p.person_id, rec, now, MODEL, p.distance_m, now - 0.5,
                                    busyness=p.busyness)


def status_array(n: int) -> list:
    return [(f"{i:08x}{'0' * 24}", "aborted", float(i)) for i in range(n)]


def navigation(n: int) -> tuple:
    """(decisions, s) for one array, bounded; and (decisions, s) one goal at a time."""
    s = session()
    s.people_seen([Person("a", 1.0), Person("b", 2.0)], T0)
    t = time.perf_counter()
    bounded = len(s.navigation_status(status_array(n), T0).decisions)
    bounded_s = time.perf_counter() - t
    s = session()
    s.people_seen([Person("a", 1.0), Person("b", 2.0)], T0)
    t = time.perf_counter()     # the loop before: a need (and a decision) per aborted goal
    each = sum(len(s.need_opened(HelpNeed(f"nav-{g[:12]}", "navigation_failure", T0),
                                 T0).decisions) for g, _, _ in status_array(n))
    return bounded, bounded_s, each, time.perf_counter() - t


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="smaller piles and arrays")
    args = p.parse_args(argv)
    rounds = 3 if args.quick else 7
    piles = (500, 1000, 2000) if args.quick else (500, 1000, 4500)
    rows = []
    for total in piles:
        print(f"pile of {total} ...", file=sys.stderr, flush=True)
        bc, bms, bb, uc, ums, ub = pile(total, rounds)
        rows.append((str(total), str(bc), f"{bms:.1f}", f"{bb / 1e6:.3f}", str(uc),
                     f"{ums:.1f}", f"{ub / 1e6:.3f}", f"{ums / bms:.1f}"))
    print("People piled up from documents of 500, a decision after the last (medians of "
          f"{rounds}); bounded beside unbounded (core.decide over all)")
    print(render_table(("people sent", "candidates", "ms", "MB", "unbounded cand.", "ms",
                        "MB", "ratio ms"), rows, (True,) * 8))
    print()
    rows = []
    for n in ((2000, 5000) if args.quick else (5000, 20000)):
        print(f"status array of {n} ...", file=sys.stderr, flush=True)
        bd, bs, ed, es = navigation(n)
        rows.append((str(n), str(bd), f"{bs:.3f}", str(ed), f"{es:.2f}", f"{es / bs:.0f}"))
    print("One status array of N aborted goals: bounded (last 1 000 entries, one need) beside "
          "a need per aborted goal (the loop before)")
    print(render_table(("aborted goals", "decisions", "s", "decisions one by one", "s",
                        "ratio s"), rows, (True,) * 6))
    print(f"\nlimits: wire.MAX_CANDIDATES {wire.MAX_CANDIDATES}, wire.MAX_DOCUMENT_BYTES "
          f"{wire.MAX_DOCUMENT_BYTES}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
