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

"""What durable asks cost: the help session's start-up, first sight of a person, an ask write.

A store with 20 000 people (--quick: 2 000), 100 000 outcome events and 200 000 asks (this
robot's and two peers', over 30 days, denser in the last hour), on SQLite. Measured in one run,
each beside what the node did before asks were stored:
- start: opening the store, then building the session (it loads this robot's own asks of the
  last hour and its newest max_asks_per_hour);
- first sight of a person: the record loaded now (belief + the person's asks) beside the load
  before (events_for + belief), 500 people, interleaved;
- a decision (its ask written durably) with 10 people in view, first (records loaded) and
  again (held), 20 rounds;
- a durable ask (append_asks, one per transaction, as each ask is written) beside a durable
  outcome (append), 300 of each, interleaved.
"""
from __future__ import annotations

import argparse
import os
import random
import statistics
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from helpaware_node.core import (  # noqa: E402
    DecisionConfig,
    HelpNeed,
    PersonRecord,
    Result,
    SiteModel,
)
from helpaware_node.session import HelpSession  # noqa: E402
from helpaware_node.store import AskEvent, person_key, SqliteStore, StoredEvent  # noqa: E402
from helpaware_node.text_table import render_table  # noqa: E402

SITE_KEY = b"s" * 32
ROBOT = "bench"
DAY_S = 86_400.0
NOW_S = 1_800_000_000.0


class Person:

    def __init__(self, pid: str, distance_m: float) -> None:
        self.person_id, self.distance_m, self.busyness, self.activity = pid, distance_m, 0.1, ""


def progress(text: str) -> None:
    print(text, file=sys.stderr, flush=True)


def build(path: str, people: int, events: int, asks: int, rng: random.Random) -> list[str]:
    keys = [person_key(SITE_KEY, f"person-{i}") for i in range(people)]
    store = SqliteStore(path, ROBOT, SITE_KEY)
    results = [Result.HELPED, Result.DECLINED, Result.NO_RESPONSE]
    progress(f"building {events} events ...")
    store.bulk_load(StoredEvent(f"peer1/{i}", keys[rng.randrange(people)],
                                NOW_S - 30 * DAY_S * rng.random(), results[rng.randrange(3)],
                                rng.random(), rng.random()) for i in range(events))
    batch, n = [], 0
    for i in range(asks):
        robot = (ROBOT, "peer1", "peer2")[i % 3]
        recent = i % 50 == 0            # the last hour is denser
        t = NOW_S - (3600.0 * rng.random() if recent else 30 * DAY_S * rng.random())
        batch.append(AskEvent(f"{robot}/{10_000_000 + i}", keys[rng.randrange(people)], t,
                              "door", f"need-{i}"))
        if len(batch) == 10_000:
            n += len(store.append_asks(batch))
            batch = []
            progress(f"  asks {n}/{asks}")
    n += len(store.append_asks(batch))
    store.close()
    return keys


def timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def ms(values) -> str:
    return f"{1e3 * statistics.median(values):.3f}"


def p95(values) -> str:
    return f"{1e3 * sorted(values)[int(0.95 * (len(values) - 1))]:.3f}"


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="2 000 people, 10 000 events, 20 000 asks")
    args = p.parse_args(argv)
    people, events, asks = (2_000, 10_000, 20_000) if args.quick else (20_000, 100_000, 200_000)
    rng = random.Random(11)
    model, config = SiteModel(), DecisionConfig()
    with tempfile.TemporaryDirectory(prefix="bench_session_") as tmp:
        path = os.path.join(tmp, "beliefs.sqlite3")
        t_build = timed(lambda: build(path, people, events, asks, rng))
        keys = [person_key(SITE_KEY, f"person-{i}") for i in range(people)]
        rows = []
        opens, starts, loaded = [], [], 0
        for _ in range(5):
            t0 = time.perf_counter()
            store = SqliteStore(path, ROBOT, SITE_KEY, model=model)
            t1 = time.perf_counter()
            session = HelpSession(store, model, config, now_s=NOW_S)
            t2 = time.perf_counter()
            opens.append(t1 - t0)
            starts.append(t2 - t1)
            loaded = len(session.robot_ask_times_s)
            store.close()
        rows.append(["start: open the store (s, median of 5)", f"{statistics.median(opens):.4f}"])
        rows.append([f"start: build the session, {loaded} own asks loaded (s)",
                     f"{statistics.median(starts):.4f}"])

        store = SqliteStore(path, ROBOT, SITE_KEY, model=model)
        session = HelpSession(store, model, config, now_s=NOW_S)
        sample = rng.sample(keys, 500)
        old, new, n_asks = [], [], []
        for key in sample:                              # interleaved, each key cold once
            t0 = time.perf_counter()
            if store.events_for(key):
                store.belief(key, model)
            else:
                PersonRecord.new(model)
            t1 = time.perf_counter()
            rec = session.memory.record_for(key)
            t2 = time.perf_counter()
            old.append(t1 - t0)
            new.append(t2 - t1)
            n_asks.append(len(rec.ask_times_s))
        rows.append(["first sight, before: events_for + belief (ms, median / p95)",
                     f"{ms(old)} / {p95(old)}"])
        rows.append([f"first sight, now: belief + asks (ms, median / p95; "
                     f"{statistics.mean(n_asks):.1f} asks each)", f"{ms(new)} / {p95(new)}"])
        rows.append(["first sight ratio now / before (medians)",
                     f"{statistics.median(new) / statistics.median(old):.2f}"])

        # the decisions two hours on, past the dense hour of this robot's history, with room
        # for all 40 asks in the hourly cap
        later = NOW_S + 7200.0
        session = HelpSession(store, model, DecisionConfig(max_asks_per_hour=100), now_s=later)
        firsts, agains, asked = [], [], [0, 0]
        for r in range(20):                 # 10 people never seen here, then the same again
            view = [Person(f"person-{1000 + 10 * r + i}", 1.0 + 0.3 * i) for i in range(10)]
            session.people_seen(view, later)
            for n, times in enumerate((firsts, agains)):
                t0 = time.perf_counter()
                step = session.need_opened(HelpNeed(f"b-{r}-{n}", "handover", later,
                                                    urgency=1.0), later)
                times.append(time.perf_counter() - t0)
                asked[n] += step.decisions[0].decision.action == "ask"
            session.seen.clear()
        rows.append([f"decision, 10 in view, records loaded first (ms, median of 20; "
                     f"{asked[0]} asked, each ask written)", ms(firsts)])
        rows.append([f"decision, 10 in view, records held (ms; {asked[1]} asked)", ms(agains)])
        ask_t, out_t = [], []
        key = keys[0]
        for i in range(300):
            ask = AskEvent(store.next_event_id(), key, NOW_S + i, "door", f"t-{i}")
            ask_t.append(timed(lambda: store.append_asks([ask])))
            ev = StoredEvent(store.next_event_id(), key, NOW_S + i, Result.DECLINED, 0.2, 0.1)
            out_t.append(timed(lambda: store.append(ev)))
        rows.append(["durable ask, append_asks of one (ms, median / p95)",
                     f"{ms(ask_t)} / {p95(ask_t)}"])
        rows.append(["durable outcome, append (ms, median / p95)", f"{ms(out_t)} / {p95(out_t)}"])
        rows.append(["ask / outcome write (medians)",
                     f"{statistics.median(ask_t) / statistics.median(out_t):.2f}"])
        size_mb = os.path.getsize(path) / 1e6
        store.close()
    print(f"store: {people} people, {events} events, {asks} asks, {size_mb:.1f} MB, "
          f"built in {t_build:.1f} s")
    print(render_table(["measure", "value"], rows, [False, True]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
