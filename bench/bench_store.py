"""The SQLite belief store at site scale: build, start-up, memory, durable commit latency.

Default: 100 000 people and 1 000 000 events (a few minutes); --quick: 2 000 and 20 000.
Prints start-up time and peak RSS of a fresh process opening the store (integrity check
included), and the latency of one durable outcome (store.append) beside a bare SQLite
insert-and-commit of the same row into a table of the same shape, same file, same pragmas
(WAL, synchronous=FULL, secure_delete), measured interleaved in one run.  Target ratio <= 1.5.
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
from helpaware_node.store import SqliteStore, StoredEvent, person_key

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
    store = SqliteStore(path, "bench", SITE_KEY)
    conn = store._conn      # the same file, connection and pragmas for the bare baseline
    # the bare baseline: a table of exactly the events table's shape (same columns, keys and
    # index), one plain INSERT and COMMIT, nothing else
    conn.execute("CREATE TABLE IF NOT EXISTS bench_bare (row_id INTEGER PRIMARY KEY, "
                 "event_id TEXT NOT NULL UNIQUE, person_key TEXT NOT NULL, time_s REAL NOT NULL,"
                 " busyness REAL NOT NULL, ask_load REAL NOT NULL, result TEXT NOT NULL, "
                 "request_kind TEXT NOT NULL DEFAULT '')")
    conn.execute("CREATE INDEX IF NOT EXISTS bench_bare_by_person ON bench_bare "
                 "(person_key, time_s, event_id)")
    rng = random.Random(3)
    keys = [person_key(SITE_KEY, f"person-{rng.randrange(n_people)}") for _ in range(commits)]
    t_next = n_events * 2.5 + 10.0
    store_s, bare_s = [], []
    for i in range(commits):
        e = StoredEvent(store.next_event_id(), keys[i], t_next + i, RESULTS[i % 3], 0.3, 0.4,
                        "door")
        row = (e.event_id, e.person_key, e.time_s, e.busyness, e.ask_load, e.result.value,
               e.request_kind)
        order = (0, 1) if i % 2 == 0 else (1, 0)
        for which in order:
            t = time.perf_counter()
            if which == 0:
                assert store.append(e)
                store_s.append(time.perf_counter() - t)
            else:
                conn.execute("BEGIN IMMEDIATE")
                conn.execute("INSERT INTO bench_bare (event_id, person_key, time_s, busyness, "
                             "ask_load, result, request_kind) VALUES (?,?,?,?,?,?,?)", row)
                conn.execute("COMMIT")
                bare_s.append(time.perf_counter() - t)
    t = time.perf_counter()
    removed = store.forget(keys[0])
    forget_s = time.perf_counter() - t
    t = time.perf_counter()             # a peer's forget of someone this store never held
    assert store.forget("ef" * 32) == 0
    stranger_s = time.perf_counter() - t
    store.close()
    med_store, med_bare = statistics.median(store_s), statistics.median(bare_s)
    p95 = lambda xs: sorted(xs)[int(0.95 * (len(xs) - 1))]  # noqa: E731

    print()
    print(f"people {n_people}, events {n_events}, file {size_mb:.1f} MB, build {build_s:.1f} s")
    print(f"{'measure':<44}{'value':>14}")
    print("-" * 58)
    print(f"{'start-up: import store module (s)':<44}{import_s:>14.3f}")
    print(f"{'start-up: open + check + first belief (s)':<44}{open_s:>14.3f}")
    print(f"{'start-up process peak RSS (MB)':<44}{rss_mb:>14.1f}")
    print(f"{'durable outcome append, median (ms)':<44}{med_store * 1e3:>14.3f}")
    print(f"{'durable outcome append, p95 (ms)':<44}{p95(store_s) * 1e3:>14.3f}")
    print(f"{'bare insert + commit, median (ms)':<44}{med_bare * 1e3:>14.3f}")
    print(f"{'bare insert + commit, p95 (ms)':<44}{p95(bare_s) * 1e3:>14.3f}")
    ratio = med_store / med_bare
    print(f"{'ratio append / bare (target <= 1.5)':<44}{ratio:>14.2f}")
    print(f"{f'forget one person ({removed} events; s)':<44}{forget_s:>14.3f}")
    print(f"{'forget of a key never stored (s)':<44}{stranger_s:>14.4f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
