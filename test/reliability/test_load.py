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

"""10x the nominal input through the node process: nothing lost, nothing refused, memory flat.

Nominal (load_driver.NOMINAL): 10 people in view at 30 Hz, a help need every 10 s.  Here: 100
people at 30 Hz on `people`, a help need every second on `task_status`, an outcome on `outcome`
for every ask, for 10 s (60 s with HELPAWARE_SOAK=1, `make soak`).  The node is started from
ros/launch_config.py with an SQLite store in tmp_path; load_driver.py (a second process, its
own rclpy) drives it and samples the node's VmRSS every second.

Latency and rates are printed, never asserted (speed belongs in bench/bench_load.py).  The
asserts are on the reliable topics and on the store read back with the sqlite3 module after a
SIGINT, so the check does not go through the store code it checks.
"""
from collections import Counter
import hashlib
import hmac
import json
import os
import signal
import sqlite3
import subprocess
import sys

from helpaware_node.ros import launch_config
import pytest
from reliability_sequence import SOAK
from site_keys import write_site_key

pytestmark = pytest.mark.ros

HERE = os.path.dirname(os.path.abspath(__file__))
DURATION_S = 60.0 if SOAK else 10.0
SITE_KEY = bytes(range(101, 133))          # our own fixed 32-byte site key for this test
NAMESPACE = "/loadtest"
# limits opened so the node keeps asking for the whole run (limits have their own suite):
# at most one ask of a person every 5 s, no daily or hourly cap in reach
LOAD_OVERRIDES = {"robot_id": "load-robot", "min_reask_interval_s": 5.0,
                  "max_asks_per_person_per_day": 1000, "max_asks_per_hour": 1000}

# Bounded memory: the RSS at the end minus the RSS at the midpoint of the run.
# In the second half of the CI run (5 s) the node takes 150 people documents of 100 people
# (7.4 kB of text each; 35 kB as a decoded dict, 28 kB as the node's SeenPerson list, both
# measured with tracemalloc), 5 help needs and about 15 decisions and outcomes.  Keeping one
# decoded document or SeenPerson list per message would add 150 x 28-35 kB = 4.2-5.3 MB;
# keeping every decision document (about 60 kB of text, several times that as dicts) about
# 1-3 MB; at soak length (30 s second half) six times as much, and even keeping only the raw
# text of each people message (150 x 7.4 kB = 1.1 MB in CI) gives 6.6 MB.  Quiet runs here
# grow 0.0-0.3 MB over the second half (allocator and DDS pools settling), so 2 MiB separates
# a per-message leak from noise at CI length and any leak of the raw text at soak length.
# Checked once by hand with a node patched to keep each people message: its decoded form grew
# 5.8 MiB over the CI second half (caught), the raw text 1.4 MiB in CI (missed) and 6.7 MiB at
# soak length (caught).
RSS_SECOND_HALF_GROWTH_LIMIT_KIB = 2048


def _key(person_id: str) -> str:
    """Return the store's person key, computed here with the standard library's HMAC-SHA256."""
    return hmac.new(SITE_KEY, person_id.encode("utf-8"), hashlib.sha256).hexdigest()


def _stop(proc, sig=signal.SIGINT):
    if proc.poll() is None:
        proc.send_signal(sig)
    try:
        _, err = proc.communicate(timeout=30)
    except subprocess.TimeoutExpired:
        proc.kill()
        _, err = proc.communicate()
    return proc.returncode, err or ""


def _rss_at(samples, t_s):
    """Return the sample nearest to t_s seconds after the load started."""
    return min(samples, key=lambda s: abs(s[0] - t_s))[1]


def _print_report(r, stored, rss_mid, rss_end):
    ph = r["phases"][0]
    lat, again = ph["first_decision_ms"], ph["redecision_ms"]
    sent, received = ph["people_sent"], ph["people_received"]
    print(f"\nload 10x for {ph['duration_s']:.1f} s: people {ph['people_rate_hz']:.1f} Hz x 100, "
          f"needs {ph['need_rate_hz']:.2f} Hz; node CPU {ph['node_cpu_s'] / ph['duration_s']:.3f}"
          f" CPU-s per s")
    print(f"people documents received by the node: {received} of {sent} "
          f"({100.0 * received / max(sent, 1):.1f} %)")
    print(f"needs {r['needs']}, decided {r['needs_decided']}, decisions {r['decisions']} "
          f"(mean {r['decision_bytes_mean'] / 1e3:.1f} kB), asks {r['asks']}, outcomes sent "
          f"{len(r['outcomes_sent'])}, stored {stored}, lost {len(r['outcomes_sent']) - stored}")
    for name, p in (("need -> decision", lat), ("outcome -> next decision", again)):
        if p["n"]:
            print(f"{name:25} n={p['n']:4d}  p50 {p['p50']:.2f}  p95 {p['p95']:.2f}  "
                  f"p99 {p['p99']:.2f}  max {p['max']:.2f} ms")
    rss = r["rss_kib"]
    print(f"RSS start {rss[0][1] / 1024:.1f} MiB, mid {rss_mid / 1024:.1f} MiB, end "
          f"{rss_end / 1024:.1f} MiB ({len(rss)} samples)")


def test_ten_times_nominal_load_loses_nothing_and_memory_stays_flat(tmp_path):
    store_dir = tmp_path / "store"
    store_dir.mkdir()
    write_site_key(store_dir, SITE_KEY)
    store_file = store_dir / "beliefs.sqlite3"
    node = launch_config.start(stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                               namespace=NAMESPACE,
                               overrides={**LOAD_OVERRIDES, "store_path": str(store_file)})
    try:
        drv = subprocess.run([sys.executable, os.path.join(HERE, "load_driver.py"),
                              "--namespace", NAMESPACE, "--node-pid", str(node.pid),
                              "--phases", f"10x:{DURATION_S:g}", "--seed", "8"],
                             capture_output=True, text=True, timeout=DURATION_S + 240)
    finally:
        code, err = _stop(node)
    lines = [x for x in drv.stdout.splitlines() if x.startswith("{")]
    assert lines, f"driver printed nothing: {drv.stderr[-3000:]}"
    r = json.loads(lines[-1])
    assert r.get("connected"), f"driver and node did not connect: {err[-2000:]}"
    assert drv.returncode == 0, drv.stderr[-3000:]
    # stopped with SIGINT: a clean exit, so the store was closed the normal way
    assert code == 0 and "Traceback" not in err, err[-3000:]

    with sqlite3.connect(f"file:{store_file}?mode=ro", uri=True) as db:
        rows = db.execute("SELECT event_id, person_key, result FROM events").fetchall()
    sent = r["outcomes_sent"]
    rss = r["rss_kib"]
    rss_mid = _rss_at(rss, r["load_elapsed_s"] / 2.0)
    rss_end = rss[-1][1]
    _print_report(r, len(rows), rss_mid, rss_end)

    # every need got a decision, and the load really exercised the outcome path
    assert r["needs"] >= 0.5 * DURATION_S, r["phases"]      # the driver did send the load
    assert r["needs_decided"] == r["needs"]
    assert r["asks"] >= r["needs"] // 2 and len(sent) == r["asks"]
    # each declined / no_response outcome made the node decide that need again
    not_helped = sum(1 for o in sent if o["result"] != "helped")
    assert not_helped > 0 and len(r["phases"][0]["redecision_s"]) == not_helped
    # no outcome lost: each one sent is an event in the file, for its person, with its result
    # (helped / declined / no_response all store an event; the key is recomputed here)
    assert Counter((_key(o["person_id"]), o["result"]) for o in sent) == \
        Counter((k, res) for _, k, res in rows)
    assert len({eid for eid, _, _ in rows}) == len(rows) == len(sent)
    # the node's own counts agree and nothing valid was refused
    diag = r["node_diagnostics"]
    assert int(diag["outcome.received"]) == len(sent)
    assert int(diag["task_status.received"]) == r["task_status_sent"]
    assert int(diag["store.events"]) == len(sent)
    for topic in ("people", "task_status", "outcome"):
        assert int(diag[f"{topic}.rejected"]) == 0, diag[f"{topic}.last_rejection"]
    assert int(diag["open_needs"]) == 0 and int(diag["pending_asks"]) == 0
    # people is best effort: only a floor that a working subscription meets on a busy
    # 2-core machine (the node spends about 0.1 CPU-s per s on this stream); a broken or
    # starved subscription receives next to nothing
    ph = r["phases"][0]
    assert ph["people_received"] >= 0.25 * ph["people_sent"]
    assert int(diag["people.received"]) <= ph["people_sent"] + r["people_warmup_sent"]
    # bounded memory (see RSS_SECOND_HALF_GROWTH_LIMIT_KIB for the arithmetic)
    assert len(rss) >= DURATION_S - 1
    assert rss_end - rss_mid < RSS_SECOND_HALF_GROWTH_LIMIT_KIB, rss
