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

"""The demo's steps: the decision node as its own process, driven by the night-shift scenario.

Start the node from launch_config with the demo site's parameters and sim time; run the
scenario process, which owns the clock and prints each decision live; stop the node cleanly;
record and review the run. The belief store stays in out/demo/ beside the bag and the report
(started afresh at each run, so every run tells the same story).
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

from . import record_and_review
from ..ros import launch_config

STORE_NAME = "beliefs.sqlite3"
# the demo's night is ~60 answered asks in ~20 s: refit every 10 outcomes and let the site's
# parameter file count as 20 outcomes (the shipped defaults are 50 and 200), so learning
# visibly moves the constants within the run
DEMO_LEARNING = {"site_learning": "apply", "site_learning_every_outcomes": 10,
                 "site_prior_weight": 20.0}
KEY_NAME = "site_key"          # the store's default key file name, beside it


def fresh_store(out_dir: str) -> str:
    """out_dir/beliefs.sqlite3 with no earlier demo's file (nor its WAL, nor its site key)."""
    os.makedirs(out_dir, exist_ok=True)
    store = os.path.abspath(os.path.join(out_dir, STORE_NAME))
    for old in (store, store + "-wal", store + "-shm", os.path.join(out_dir, KEY_NAME)):
        if os.path.exists(old):
            os.remove(old)             # our own artefacts of an earlier demo run
    return store


def start_node(namespace: str, store_path: str) -> subprocess.Popen:
    spec = launch_config.decider(
        launch_config.SITE_PARAMS_FILE, namespace,
        overrides={"use_sim_time": True, "store_path": store_path, "robot_id": "supply-robot-1",
                   **DEMO_LEARNING})
    return launch_config.start(spec=spec, stderr=subprocess.PIPE)


def wait_configured(node: subprocess.Popen, timeout_s: float = 30.0) -> bool:
    deadline = time.monotonic() + timeout_s
    assert node.stderr is not None   # started with stderr=PIPE
    while time.monotonic() < deadline:
        line = node.stderr.readline()
        if "configured" in line:
            return True
        if not line and node.poll() is not None:
            return False
    return False


def run_night_shift(args: argparse.Namespace) -> int:
    """Return the demo's steps, in order."""
    started = time.monotonic()
    print("helpaware demo: invented hospital night shift (a supply robot, 40 staff), sped up")
    out_dir = record_and_review.OUT_DIR
    store_path = fresh_store(out_dir)
    # 1. the decision node, as a robot would run it
    node = start_node(args.namespace, store_path)
    try:
        if not wait_configured(node):
            print("demo: the decision node did not start:")
            print(node.stderr.read() if node.stderr and node.poll() is not None
                  else "(no output)")
            return 1
        print(f"node up in {args.namespace} (site parameters config/hospital_night.yaml)\n")
        recorder = record_and_review.start_recorder(
            args.namespace, os.path.join(os.path.dirname(store_path), KEY_NAME))
        # 2. the scenario process: owns /clock, shows people, opens needs, answers asks
        scenario = subprocess.run(
            [sys.executable, "-m", "helpaware_node.demo.night_shift",
             "--namespace", args.namespace, "--needs", str(args.needs),
             "--seed", str(args.seed)], timeout=120)
        bag = record_and_review.stop_recorder(recorder)
    finally:
        # 3. stop the node cleanly (what it learned is in its store from each outcome on)
        code = launch_config.stop(node)
    # 4. report
    print(f"\nnode exited with code {code}; demo took {time.monotonic() - started:.1f} s")
    record_and_review.review_bag(bag)
    rel = os.path.relpath(store_path)
    print(f"belief store: {rel} (site key beside it); look inside with\n"
          f"  helpaware store --path {rel} inspect\n"
          f"  helpaware store --path {rel} inspect --person nurse-00\n"
          f"  helpaware store --path {rel} learned")
    return scenario.returncode or (0 if code == 0 else 1)
