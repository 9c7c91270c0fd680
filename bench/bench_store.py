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

"""The SQLite belief store at site scale: build, start-up, memory, durable commit latency.

Default: 100 000 people and 1 000 000 events (a few minutes); --quick: 2 000 and 20 000.
Prints start-up time and peak RSS of a fresh process opening the store (integrity check
included); the latency of one durable outcome (store.append) beside its floor, the same
durable writes done by hand with the sqlite3 module (event row, snapshot update, sequence
upsert in one BEGIN IMMEDIATE ... COMMIT, same tables, same pragmas: WAL,
synchronous=FULL, secure_delete), measured interleaved in one run (target ratio <= 1.2);
and the longest gap between the calls of a 5 ms ROS timer while a forget, an opt-out, a
retention run and a compaction run on the store's worker (target < 50 ms each), beside a
forget run in a callback as the node did before, with the longest durable append a 20 ms timer
made meanwhile (how long an outcome waits for the worker's transactions).
"""
from __future__ import annotations

import argparse
import os
import random
import statistics
import subprocess
import sys
import tempfile
import time

from helpaware_node.core import Result
from helpaware_node.store import person_key, SqliteStore, StoredEvent
from ros_domain import loopback_own_domain  # noqa: E402  (bench/ is this script's folder)

loopback_own_domain()   # the executor-gap part starts rclpy: loopback, a domain of its own

SITE_KEY = b"b" * 32
RESULTS = [Result.HELPED, Result.DECLINED, Result.NO_RESPONSE, Result.COULD_NOT_ASK]

STARTUP_CHILD = r"""
import resource, sys, time
t0 = time.perf_counter()
from helpaware_node.store import SqliteStore
t1 = time.perf_counter()
store = SqliteStore(sys.argv[1], "bench", b"b" * 32)
keys = store.keys()
b = store.belief(keys[len(keys) // 2])
t2 = time.perf_counter()
print(t1 - t0, t2 - t1, len(keys), store.health.level,
      resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def generate(n_people: int, n_events: int, seed: int = 7):
    rng = random.Random(seed)
    keys = [person_key(SITE_KEY, f"person-{i}") for i in range(n_people)]
    for i in range(n_events):
        yield StoredEvent(f"r{i % 4}/{i}", keys[i % n_people] if i < n_people else
                          keys[rng.randrange(n_people)], float(i) * 2.5 + rng.random(),
                          RESULTS[rng.randrange(4)], rng.random(), rng.random() * 2.0, "door")


def progress(text: str) -> None:
    print(text, flush=True)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="2 000 people, 20 000 events")
    p.add_argument("--people", type=int, default=None)
    p.add_argument("--events", type=int, default=None)
    p.add_argument("--commits", type=int, default=400, help="timed commits of each kind")
    p.add_argument("--dir", default=None, help="directory for the store (default: the system "
                   "temp directory; give a directory on the robot's real disk if that is tmpfs)")
    args = p.parse_args(argv)
    n_people = args.people or (2000 if args.quick else 100_000)
    n_events = args.events or (20_000 if args.quick else 1_000_000)
    workdir = tempfile.mkdtemp(prefix="bench_store_", dir=args.dir)
    path = os.path.join(workdir, "beliefs.sqlite3")
    try:
        return run(path, n_people, n_events, args.commits)
    finally:
        for name in os.listdir(workdir):
            os.remove(os.path.join(workdir, name))
        os.rmdir(workdir)


def run(path: str, n_people: int, n_events: int, commits: int) -> int:
    progress(f"building {n_people} people, {n_events} events in {path}")
    t0 = time.perf_counter()
    store = SqliteStore(path, "bench", SITE_KEY)
    store.bulk_load(generate(n_people, n_events))
    counts = store.counts()
    store.close()
    build_s = time.perf_counter() - t0
    size_mb = os.path.getsize(path) / 1e6
    progress(f"built in {build_s:.1f} s: {counts['persons']} people, {counts['events']} events, "
             f"{size_mb:.1f} MB")

    progress("start-up in a fresh process (3 runs)")
    runs = []
    for _ in range(3):
        out = subprocess.run([sys.executable, "-c", STARTUP_CHILD, path], capture_output=True,
                             text=True, check=True).stdout.split()
        runs.append((float(out[0]), float(out[1]), int(out[2]), out[3], int(out[4])))
    assert all(r[2] == n_people and r[3] == "OK" for r in runs), runs
    import_s = statistics.median(r[0] for r in runs)
    open_s = statistics.median(r[1] for r in runs)
    rss_mb = max(r[4] for r in runs) / 1024.0

    progress(f"durable commit latency ({commits} of each, interleaved)")
    t_next = n_events * 2.5 + 10.0
    store_s, floor_s, removed, forget_s, stranger_s = commit_latency(path, n_people, t_next,
                                                                     commits)

    progress("the executor while store jobs run on the worker (5 ms timer, longest gap)")
    gaps = executor_gaps(path, n_people, t_next)
    report(n_people, n_events, size_mb, build_s, import_s, open_s, rss_mb, store_s, floor_s,
           removed, forget_s, stranger_s, gaps)
    return 0


def commit_latency(path: str, n_people: int, t_next: float, commits: int):
    """store.append beside its floor, interleaved; then a forget in the caller, as before."""
    store = SqliteStore(path, "bench", SITE_KEY)
    conn = store._conn      # the same file, connection and pragmas for the floor
    rng = random.Random(3)
    people = rng.sample(range(n_people), 2 * commits)
    keys = [person_key(SITE_KEY, f"person-{i}") for i in people[:commits]]
    floor_keys = [person_key(SITE_KEY, f"person-{i}") for i in people[commits:]]
    store_s, floor_s = [], []
    for i in range(commits):
        e = StoredEvent(store.next_event_id(), keys[i], t_next + i, RESULTS[i % 3], 0.3, 0.4,
                        "door")
        # the floor: the same durable writes done by hand with the sqlite3 module, in the
        # store's own tables (same schema, indexes, pragmas: WAL, synchronous=FULL,
        # secure_delete) and the same commit pattern: BEGIN IMMEDIATE; INSERT the event row;
        # UPDATE the person's snapshot row (an existing person, other than the store's);
        # upsert the robot's sequence; COMMIT. Nothing read, checked or folded.
        row = (f"floor/{i + 1}", floor_keys[i], t_next + i, 0.3, 0.4, RESULTS[i % 3].value,
               "door")
        snap = (1.5 + i * 1e-6, 2.5, t_next + i, row[0], floor_keys[i])
        order = (0, 1) if i % 2 == 0 else (1, 0)
        for which in order:
            t = time.perf_counter()
            if which == 0:
                assert store.append(e)
                store_s.append(time.perf_counter() - t)
            else:
                conn.execute("BEGIN IMMEDIATE")
                conn.execute("INSERT INTO events (event_id, person_key, time_s, busyness, "
                             "ask_load, result, request_kind) VALUES (?,?,?,?,?,?,?)", row)
                conn.execute("UPDATE snapshot SET a = ?, b = ?, last_time_s = ?, "
                             "last_event_id = ?, event_count = event_count + 1 WHERE "
                             "person_key = ?", snap)
                conn.execute("INSERT INTO sequences VALUES (?, ?) ON CONFLICT(robot_id) DO "
                             "UPDATE SET next_seq = max(next_seq, excluded.next_seq)",
                             ("floor", i + 2))
                conn.execute("COMMIT")
                floor_s.append(time.perf_counter() - t)
    t = time.perf_counter()
    removed = store.forget(keys[0])
    forget_s = time.perf_counter() - t
    t = time.perf_counter()             # a peer's forget of someone this store never held
    assert store.forget("ef" * 32) == 0
    stranger_s = time.perf_counter() - t
    store.close()
    return store_s, floor_s, removed, forget_s, stranger_s


def report(n_people, n_events, size_mb, build_s, import_s, open_s, rss_mb, store_s, floor_s,
           removed, forget_s, stranger_s, gaps) -> None:
    med_store, med_floor = statistics.median(store_s), statistics.median(floor_s)
    p95 = lambda xs: sorted(xs)[int(0.95 * (len(xs) - 1))]  # noqa: E731
    print()
    print(f"people {n_people}, events {n_events}, file {size_mb:.1f} MB, build {build_s:.1f} s")
    print(f"{'measure':<52}{'value':>14}")
    print("-" * 66)
    print(f"{'start-up: import store module (s)':<52}{import_s:>14.3f}")
    print(f"{'start-up: open + check + first belief (s; < 0.5)':<52}{open_s:>14.3f}")
    print(f"{'start-up process peak RSS (MB)':<52}{rss_mb:>14.1f}")
    print(f"{'durable outcome append, median (ms)':<52}{med_store * 1e3:>14.3f}")
    print(f"{'durable outcome append, p95 (ms)':<52}{p95(store_s) * 1e3:>14.3f}")
    print(f"{'floor: same writes by hand, median (ms)':<52}{med_floor * 1e3:>14.3f}")
    print(f"{'floor: same writes by hand, p95 (ms)':<52}{p95(floor_s) * 1e3:>14.3f}")
    ratio = med_store / med_floor
    print(f"{'ratio append / floor (target <= 1.2)':<52}{ratio:>14.2f}")
    print(f"{f'forget one person in the caller ({removed} events; s)':<52}{forget_s:>14.3f}")
    print(f"{'forget of a key never stored, in the caller (s)':<52}{stranger_s:>14.4f}")
    for name, (gap_s, job_s, extra, append_s, n_appends) in gaps.items():
        print(f"{f'executor max gap, {name} (ms; < 50)':<52}{gap_s * 1e3:>14.1f}")
        where = "in the callback" if "callback" in name else "on the worker"
        print(f"{f'  its time {where}{extra} (s)':<52}{job_s:>14.3f}")
        label = f"  longest of its {n_appends} appends meanwhile (ms)"
        print(f"{label:<52}{append_s * 1e3:>14.1f}")
    print()
    print("floor: BEGIN IMMEDIATE; INSERT the event row; UPDATE the person's snapshot row; upsert")
    print("the robot's sequence; COMMIT - by hand with the sqlite3 module, in the store's own "
          "tables")
    print("and connection (WAL, synchronous=FULL, secure_delete), other people than the store's;")
    print("append = store.append of the same kind of outcome (checks, snapshot read, fold, "
          "writes).")
    return 0


def executor_gaps(path: str, n_people: int, t_end: float) -> dict:
    """Print the longest timer gap while each store job runs on the worker.

    The longest gap between the calls of a 5 ms timer while each store job runs on the worker
    (store/jobs.py, reported back by a guard condition as in ros/node_entities.py), on the big
    store; the reference row runs a forget in a timer callback, as the node did.
    """
    from helpaware_node.store.jobs import StoreJobs
    import rclpy
    from rclpy.executors import SingleThreadedExecutor
    ctx = rclpy.Context()
    rclpy.init(args=[], context=ctx)
    node = rclpy.create_node("bench_store_gaps", context=ctx, start_parameter_services=False,
                             enable_rosout=False)
    executor = SingleThreadedExecutor(context=ctx)
    executor.add_node(node)
    store = SqliteStore(path, "bench", SITE_KEY)
    wake = node.create_guard_condition(lambda: jobs.poll())
    jobs = StoreJobs(store, wake=wake.trigger)
    ticks: list[float] = []
    node.create_timer(0.005, lambda: ticks.append(time.perf_counter()))
    rng = random.Random(11)
    out = {}
    # an outcome every 20 ms while a job runs, as the node's executor would store it: how long
    # the durable append waits for the worker's transactions
    appends_s: list[float] = []
    t_next = [t_end + 1e6]

    def append_one():
        t_next[0] += 1.0
        e = StoredEvent(store.next_event_id(), key(), t_next[0], RESULTS[len(appends_s) % 3],
                        0.3, 0.4, "door")
        t = time.perf_counter()
        store.append(e)
        appends_s.append(time.perf_counter() - t)
    node.create_timer(0.02, append_one)

    def measure(name: str, start, extra: str = "") -> None:
        for _ in range(20):                     # settle: the timer ticking
            executor.spin_once(timeout_sec=0.05)
        done: list = []
        t0 = time.perf_counter()
        job = start(done)
        ticks[:] = [t0]                         # the gap counts from the submission
        appends_s.clear()
        while not done and time.perf_counter() - t0 < 300.0:
            executor.spin_once(timeout_sec=0.05)
        for _ in range(4):                      # the ticks right after the report
            executor.spin_once(timeout_sec=0.05)
        assert done and done[0].error is None, (name, done and done[0].error)
        gap = max(b - a for a, b in zip(ticks, ticks[1:]))
        out[name] = (gap, getattr(job, "elapsed_s", time.perf_counter() - t0), extra,
                     max(appends_s, default=float("nan")), len(appends_s))

    key = lambda: person_key(SITE_KEY, f"person-{rng.randrange(n_people)}")  # noqa: E731
    measure("forget", lambda done: jobs.forget(key(), done.append))
    measure("forget (stranger)", lambda done: jobs.forget("ab" * 32, done.append))
    measure("opt-out", lambda done: jobs.opt_out(key(), done.append))
    # retention: the daily run, the oldest events past the limit (about 2 % of the log);
    # compaction: an operator's `store compact` folding half of the log
    measure("retention", lambda done: jobs.compact(0.0, now_s=0.02 * t_end,
                                                   on_done=done.append), " (2 % of events)")
    measure("compaction", lambda done: jobs.compact(0.0, now_s=0.5 * t_end,
                                                    on_done=done.append), " (half the events)")

    class Sync:                                 # the reference: the old way, in a callback
        elapsed_s = 0.0

    def in_callback(done):
        def run():
            t = time.perf_counter()
            store.forget(key())
            Sync.elapsed_s = time.perf_counter() - t
            done.append(StoreJobDone())
            timer.cancel()
        timer = node.create_timer(0.001, run)
        return Sync
    measure("forget in a callback", in_callback)
    jobs.close()
    store.close()
    executor.shutdown(timeout_sec=1.0)
    node.destroy_node()
    rclpy.try_shutdown(context=ctx)
    return out


class StoreJobDone:
    error = None


if __name__ == "__main__":
    sys.exit(main())
