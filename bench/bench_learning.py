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

"""Site learning: refit time at the node's store sizes, the half-life's recovery.

The cost of a change of constants on a big store, and decisions while a refit runs beside them.

1. Refit time: simulated sites (10 outcomes per person, 15 % of asks unanswered) of 1 000,
   10 000 and 100 000 outcomes in an SQLite store; the read of every outcome and ask (the
   worker's own connection), the table with its ask pairs, the refit (prior weight 200) and
   the plain fit (weight 0, `helpaware fit`), side by side; and the ask loads of one
   half-life by the vectorised pairs against the core's ask_load called per outcome.
2. Half-life recovery: known half-lives (5 min, 1 h, 3 h, 1 day), several seeds; estimate,
   standard error, and whether the truth lies within 2 s.e.
3. A change of constants on a store of 10 000 people, all held in memory: the lazy refold
   (what the node does) against refolding every held person at once (what it did).
4. Decision time of a help session with a refit beside it: none, in a thread (which shares
   the interpreter lock), in the worker process the node uses.

Usage: bench/bench_learning.py [--sizes 1000 10000 100000] [--seeds 4] [--quick] [--parts 1 2 3 4]
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import threading
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "test"))

from helpaware_node.core import DecisionConfig, HelpNeed, SiteModel  # noqa: E402
from helpaware_node.core.context import ask_load  # noqa: E402
from helpaware_node.fit.online import learning_data, LearningSettings, SiteLearner  # noqa: E402
from helpaware_node.fit.site_fit import fit_site  # noqa: E402
from helpaware_node.fit.site_likelihood import SiteParams  # noqa: E402
from helpaware_node.session import HelpSession, SessionRules  # noqa: E402
from helpaware_node.store import SqliteStore  # noqa: E402
from helpaware_node.text_table import render_table  # noqa: E402
from learning_events import site  # noqa: E402  (test/learning_events.py: invented sites)
import numpy as np  # noqa: E402

TRUTH = SiteParams(1.0, 3.0, 3.0, 1.0, 0.7, 0.7, 3 * 3600.0)
KEY = b"b" * 32


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def refit_times(sizes, tmp) -> None:
    rows = []
    for n in sizes:
        people = max(n // 10, 10)
        _, outcomes, asks = site(TRUTH, people, 11.5, seed=1, robots=("r1", "r2"))
        path = os.path.join(tmp, f"store_{n}.sqlite3")
        store = SqliteStore(path, "r1", KEY)
        store.append_many(outcomes)
        store.append_asks(asks)
        (o, a), t_read = timed(store.learning_reader())
        data, t_table = timed(lambda: learning_data(o, a))
        learner = SiteLearner(SiteModel(), LearningSettings(prior_weight=200.0))
        refit, t_refit = timed(lambda: learner.refit(o, a, 0.0))
        plain, t_plain = timed(lambda: fit_site(data, half_life_s=1800.0))
        h = 3600.0
        _, t_vec = timed(lambda: data.prior_asks.loads(h, data.n_outcomes))
        # the core's ask_load per outcome, from each person's asks before it (no pairs kept)
        by_person: dict = {}
        for ask in a:
            by_person.setdefault(ask.person_key, []).append(ask.time_s)
        sample = o[:min(len(o), 2000)]
        _, t_core = timed(lambda: [ask_load([t for t in by_person.get(e.person_key, [])
                                             if t < e.time_s], e.time_s, h) for e in sample])
        t_core *= len(o) / len(sample)
        rows.append((f"{data.n_outcomes}", f"{data.n_people}", f"{len(a)}",
                     f"{data.prior_asks.row.size}", f"{t_read:.2f}", f"{t_table:.2f}",
                     f"{t_refit:.1f}", "yes" if refit.accepted else "NO",
                     f"{t_plain:.1f}", f"{t_refit / t_plain:.2f}",
                     f"{t_vec * 1e3:.1f}", f"{t_core * 1e3:.0f}", f"{t_core / t_vec:.0f}"))
        store.close()
    print("1. Refit time by store size (seconds unless stated; one run each)")
    print(render_table(("outcomes", "people", "asks", "ask pairs", "read", "table",
                        "refit (w 200)", "accepted", "plain fit (w 0)", "refit / plain",
                        "loads, pairs (ms)", "loads, core per row (ms)", "core / pairs"),
                       rows, (True,) * 13))


def recovery(seeds: int, people: int) -> None:
    rows, inside, total = [], 0, 0
    for i, h in enumerate((300.0, 3600.0, 3 * 3600.0, 86400.0)):
        truth = SiteParams(2.0, 3.0, 1.5, 1.2, 0.6, 0.7, h)
        # seeds differ per half-life: the simulation scales with h, so one seed would give
        # the same standardised data at every h
        for seed in range(1 + 100 * i, seeds + 1 + 100 * i):
            sim = site(truth, people, 8, seed=seed)[0]
            fit = fit_site(sim.data, half_life_s=1800.0)
            est = fit.params.ask_memory_half_life_s
            se = fit.std_errors.get("ask_memory_half_life_s", float("nan"))
            ok = abs(est - h) < 2 * se
            inside += ok
            total += 1
            rows.append((f"{h:g}", seed, f"{est:.0f}", f"{se:.0f}", f"{(est - h) / se:+.2f}",
                         "yes" if ok else "no", "yes" if fit.converged else "NO"))
    print(f"\n2. Half-life recovery ({people} people, 8 asks each, 15 % unanswered; the "
          "robot's load column used 1800 s and is not used)")
    print(render_table(("true h (s)", "seed", "estimate (s)", "s.e. (s)", "(est - true) / s.e.",
                        "within 2 s.e.", "converged"), rows, (True,) * 7))
    print(f"within 2 s.e.: {inside} of {total} (about 95 % expected)")


def model_change(tmp) -> None:
    _, outcomes, asks = site(TRUTH, 10000, 10, seed=2)
    store = SqliteStore(os.path.join(tmp, "change.sqlite3"), "r1", KEY)
    store.append_many(outcomes)
    keys = store.keys()
    s = HelpSession(store, SiteModel(), DecisionConfig(), SessionRules(), now_s=1.0)
    for k in keys:
        s.memory.record_for(k)
    new = SiteModel(prior_a=1.1, prior_b=2.9, k_busy=2.8)
    _, t_lazy = timed(lambda: (s.set_parameters(new, DecisionConfig(), SessionRules()),
                               store.use_model(new)))
    _, t_first = timed(lambda: [s.memory.record_for(k) for k in keys[:20]])
    other = SiteModel(prior_a=1.3, prior_b=2.7)
    store.use_model(other)

    def eager():      # every held record refolded at once, as before the change
        for k in keys:
            s.memory.records[k] = s.memory._with_stored_belief(s.memory.records[k], k)
    s.memory.model = other
    _, t_eager = timed(eager)
    store.close()
    print("\n3. A change of constants with 10 000 people held (SQLite store, "
          f"{len(outcomes)} outcomes)")
    print(render_table(("what", "seconds"), [
        ("lazy (the node): set_parameters + store.use_model", f"{t_lazy:.4f}"),
        ("  then the first read of 20 people (refold + snapshot write each)", f"{t_first:.3f}"),
        ("eager: refold all 10 000 at once", f"{t_eager:.1f}")], (False, True)))


def decisions_beside_a_refit(tmp, pause_s: float) -> None:
    from helpaware_node.fit.refit_worker import RefitWorker
    from helpaware_node.store import MemoryStore
    from helpaware_node.store.base import EventsReader
    from session_people import Person
    _, outcomes, asks = site(TRUTH, 5000, 10, seed=3)
    config = DecisionConfig(min_reask_interval_s=0.0, max_asks_per_person_per_day=1000,
                            max_asks_per_hour=1000)
    # a memory store: the decisions' own store writes (fsync) stay out of the figures
    s = HelpSession(MemoryStore(robot_id="r1"), SiteModel(), config,
                    SessionRules(max_asks_per_need=1), now_s=1.0)
    staff = [Person(f"p{i}", 1.0 + i) for i in range(20)]
    counter = [0]

    def decide_while(running) -> list[float]:
        out = []
        while running() or not out:
            counter[0] += 1
            t = 1000.0 + counter[0]
            s.people_seen(staff, t, complete_view=True)
            t0 = time.perf_counter()
            s.need_opened(HelpNeed(f"n{counter[0]}", "door", t), t)
            out.append(time.perf_counter() - t0)
            if pause_s:
                time.sleep(pause_s)
        return out
    first = counter[0]
    idle = decide_while(lambda: counter[0] - first < 300)
    job = SiteLearner(SiteModel(), LearningSettings()).job(0.0)
    reader = EventsReader(tuple(outcomes), tuple(asks))
    box = {}
    worker = threading.Thread(target=lambda: box.update(r=job.run(*reader())))
    t0 = time.perf_counter()
    worker.start()
    threaded = decide_while(worker.is_alive)
    t_thread = time.perf_counter() - t0
    proc = RefitWorker()
    t0 = time.perf_counter()
    proc.submit(reader, job)
    reply = []

    def running():
        if not reply:
            r = proc.poll()
            if r is not None:
                reply.append(r)
        return not reply
    in_process = decide_while(running)
    t_proc = time.perf_counter() - t0
    proc.stop()
    q = lambda v, p: f"{np.percentile(v, p) * 1e3:.2f}"   # noqa: E731
    pace = f"a decision every {pause_s * 1e3:g} ms" if pause_s else "decisions back to back"
    print(f"\n4. Decision time (ms) of a help session, 20 people in view, {pace}, beside a "
          f"refit of {len(outcomes)} outcomes")
    print(render_table(("refit", "refit took (s)", "decisions", "median", "95th pct", "max"), [
        ("none", "", len(idle), q(idle, 50), q(idle, 95), q(idle, 100)),
        ("in a thread", f"{t_thread:.1f}", len(threaded), q(threaded, 50), q(threaded, 95),
         q(threaded, 100)),
        ("in a worker process (the node)", f"{t_proc:.1f}", len(in_process),
         q(in_process, 50), q(in_process, 95), q(in_process, 100))],
        (False, True, True, True, True, True)))
    same = reply[0][0] == "ok" and reply[0][1].model == box["r"].model
    print(f"the same refit both ways: {same}"
          " (the process's time includes its start, about 2 s, and sending the events)")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    ap.add_argument("--seeds", type=int, default=4)
    ap.add_argument("--people", type=int, default=400)
    ap.add_argument("--quick", action="store_true", help="1 000 and 10 000 outcomes, 2 seeds")
    ap.add_argument("--parts", type=int, nargs="+", default=[1, 2, 3, 4])
    args = ap.parse_args(argv)
    if args.quick:
        args.sizes, args.seeds = [1000, 10000], 2
    with tempfile.TemporaryDirectory() as tmp:
        if 1 in args.parts:
            refit_times(args.sizes, tmp)
        if 2 in args.parts:
            recovery(args.seeds, args.people)
        if 3 in args.parts:
            model_change(tmp)
        if 4 in args.parts:
            decisions_beside_a_refit(tmp, 0.002)
            decisions_beside_a_refit(tmp, 0.0)
    return 0


if __name__ == "__main__":
    sys.exit(main())
