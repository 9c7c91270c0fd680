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

"""Site learning in a node process.

a revision learned from the store's outcomes shows in /diagnostics, is kept in the store, and is in
force again after a restart (no refit needed).

The node is started as users start it (ros/launch_config.py through process_rig) on an SQLite
store in tmp_path that already holds a simulated site's outcomes and asks (invented data);
what the store holds is read back with the sqlite3 module read-only, not through the store's
own code, and the decision document is read as a user reviewing a bag would.
"""
import json
import random
import sqlite3

import pytest

pytest.importorskip("rclpy")

# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from diagnostic_msgs.msg import DiagnosticArray  # noqa: E402,I100
from helpaware_node.fit.online import LEARNED  # noqa: E402
from helpaware_node.fit.site_likelihood import SiteParams  # noqa: E402
from helpaware_node.store import SqliteStore  # noqa: E402
from helpaware_node.store.keys import SiteKeys  # noqa: E402
from learning_events import site  # noqa: E402
from process_rig import (  # noqa: E402
    Drive,
    Robot,
    SITE_KEY,
    start_node,
    stop_gently,
    write_site_key,
)

pytestmark = pytest.mark.ros

NS = "/learning"
LEARNING = {"site_learning": "apply", "site_learning_every_outcomes": 20,
            "site_prior_weight": 50.0, "ask_memory_half_life_s": 1800.0,
            "interruption_weight_s": 0.0}
NURSE = {"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}


def latest_status(drive: Drive, seen: list) -> dict:
    for arr in reversed(seen):
        for st in arr.status:
            if st.hardware_id.startswith(NS):
                return {v.key: v.value for v in st.values}
    return {}


def stored_revisions(path) -> list[tuple[int, dict, int]]:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return [(r[0], json.loads(r[1]), r[2]) for r in conn.execute(
            "SELECT revision, constants, n_outcomes FROM learned_constants ORDER BY revision")]
    finally:
        conn.close()


def test_learned_constants_show_in_diagnostics_and_survive_a_restart(tmp_path):
    write_site_key(tmp_path)
    store_path, log = tmp_path / "beliefs.sqlite3", tmp_path / "node.log"
    _, outcomes, asks = site(SiteParams(1.0, 3.0, 3.5, 1.0, 0.8, 0.7, 3 * 3600.0), 120, 6,
                             seed=4, robots=("peer1",))
    pre = SqliteStore(store_path, "peer1", SiteKeys.single(SITE_KEY))
    pre.append_many(outcomes)
    pre.append_asks(asks)
    pre.close()
    drive = Drive("learning_driver")
    seen: list = []
    drive.node.create_subscription(DiagnosticArray, "/diagnostics", seen.append, 10)
    robot = drive.add(Robot("learn1", NS, f"{NS}/helpaware/fleet", [NURSE], random.Random(1)))
    proc = start_node(store_path, "learn1", NS, log, limits=LEARNING)
    try:
        assert drive.spin_until(lambda: latest_status(drive, seen).get(
            "site_learning.revision") == "1", 180.0), log.read_text()[-3000:]
        first = latest_status(drive, seen)
        assert first["site_learning.constants_source"] == "learned"
        assert first["site_learning.last_refit_outcomes"] == str(len(outcomes))
        [(revision, constants, n)] = stored_revisions(store_path)
        assert revision == 1 and n == len(outcomes)
        for name in LEARNED:
            assert first[f"site_model.{name}"] == f"{constants[name]:.6g}"
        assert float(first["site_model.prior_a"]) != 2.0        # it did learn something
        # the change shows old (the parameter file's 2) -> new (the stored revision's value)
        assert f"prior_a 2 -> {constants['prior_a']:.4g}" in first["site_learning.last_change"]
        stop_gently(proc)
        proc = start_node(store_path, "learn1", NS, log, limits=LEARNING)
        seen.clear()
        assert drive.spin_until(lambda: latest_status(drive, seen).get(
            "site_learning.constants_source") == "learned", 120.0), log.read_text()[-3000:]
        again = latest_status(drive, seen)
        assert again["site_learning.revision"] == "1" and again["site_learning.refits"] == "0"
        for name in LEARNED:
            assert again[f"site_model.{name}"] == first[f"site_model.{name}"]
        decision = drive.probe(robot)
        params = decision["parameters"]
        assert params["source"] == {"site_constants": "learned", "revision": 1}
        for name in LEARNED:
            assert params["model"][name] == constants[name]
        assert "resumed revision 1" in log.read_text()
    finally:
        stop_gently(proc)
        drive.close()
