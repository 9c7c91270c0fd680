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

"""Two robots in two processes share outcomes; a third started late catches up.

The peers are `python -m helpaware_node.ros.fleet` (FleetLink on an SQLite store). The test
process also listens on the fleet topic to check that no raw id travels on it, and that every
document there is signed for the site.
"""
import queue
import subprocess
import sys
import threading
import time

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.fleet_documents import decode_document  # noqa: E402,I100
from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC  # noqa: E402
from helpaware_node.store.keys import load_site_key, load_site_keys  # noqa: E402
from rclpy.context import Context  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402
from std_msgs.msg import String  # noqa: E402

RAW = ["nurse-ingrid-olsen", "porter-7-night", "warmup-person"]


class Peer:

    def __init__(self, tmp_path, robot_id):
        self.lines: queue.Queue = queue.Queue()
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "helpaware_node.ros.fleet", "--store",
             str(tmp_path / f"{robot_id}.sqlite3"), "--key-file", str(tmp_path / "site_key"),
             "--robot-id", robot_id],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
            text=True, bufsize=1)
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        for line in self.proc.stdout:
            self.lines.put(line.strip())

    def send(self, text):
        self.proc.stdin.write(text + "\n")
        self.proc.stdin.flush()

    def expect(self, prefix, deadline_s):
        end = time.monotonic() + deadline_s
        while time.monotonic() < end:
            try:
                line = self.lines.get(timeout=max(0.01, end - time.monotonic()))
            except queue.Empty:
                break
            if line.startswith(prefix):
                return line
        raise AssertionError(f"no {prefix!r} within {deadline_s} s")

    def belief(self, raw):
        self.send(f"belief {raw}")
        return self.expect("belief ", 10.0)

    def stop(self):
        try:
            self.send("quit")
            self.proc.wait(timeout=10)
        except Exception:
            self.proc.kill()
            self.proc.wait()


def test_outcome_reaches_the_other_robot_and_a_late_robot_catches_up(tmp_path):
    load_site_key(tmp_path / "site_key")            # one site key shared by the site's robots
    ctx = Context()
    rclpy.init(context=ctx)
    node = rclpy.create_node("fleet_listener", context=ctx)
    heard = []
    node.create_subscription(String, FLEET_TOPIC, lambda m: heard.append(m.data), fleet_qos())
    executor = SingleThreadedExecutor(context=ctx)
    executor.add_node(node)
    spinner = threading.Thread(target=executor.spin, daemon=True)
    spinner.start()
    peers = []
    try:
        a, b = Peer(tmp_path, "r1"), Peer(tmp_path, "r2")
        peers += [a, b]
        a.expect("ready", 30.0)
        b.expect("ready", 30.0)
        prior = b.belief(RAW[0])
        # warm-up: discovery between new processes may take a while on a loaded machine
        a.send(f"outcome {RAW[2]} helped 10")
        b.expect("merged r1/1", 30.0)
        a.send(f"outcome {RAW[0]} helped 100")
        a.expect("ack r1/2", 10.0)
        b.expect("merged r1/2", 2.0)                  # within 2 s once the robots know each other
        assert b.belief(RAW[0]) != prior
        b.send(f"outcome {RAW[1]} declined 200")
        a.expect("merged r2/1", 5.0)
        c = Peer(tmp_path, "r3")                      # starts late, catches up from history
        peers.append(c)
        c.expect("ready", 30.0)
        got = {c.expect("merged ", 30.0).split()[1] for _ in range(3)}
        assert got == {"r1/1", "r1/2", "r2/1"}
        for raw in RAW:
            assert a.belief(raw) == b.belief(raw) == c.belief(raw)
        deadline = time.monotonic() + 10.0
        while len(heard) < 3 and time.monotonic() < deadline:
            time.sleep(0.05)
        assert len(heard) >= 3
        keys = load_site_keys(tmp_path / "site_key", create=False).key_ring()
        for text in heard:
            for raw in RAW:
                assert raw not in text
            assert decode_document(text, keys)[0] == "outcome"     # signed for this site
    finally:
        for p in peers:
            p.stop()
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()
        rclpy.try_shutdown(context=ctx)
