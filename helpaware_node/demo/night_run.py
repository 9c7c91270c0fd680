"""The demo's steps: the decision node as its own process, driven by the night-shift scenario.

Start the node from launch_config with the demo site's parameters and sim time; run the
scenario process, which owns the clock and prints each decision live; stop the node cleanly;
record and review the run.
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

from ..ros import launch_config
from . import record_and_review


def start_node(namespace: str, store_dir: str) -> subprocess.Popen:
    return launch_config.start(
        params=launch_config.SITE_PARAMS_FILE, namespace=namespace,
        overrides={"use_sim_time": True, "store_path": os.path.join(store_dir, "beliefs.sqlite3"),
                   "robot_id": "supply-robot-1"},
        stderr=subprocess.PIPE)


def wait_configured(node: subprocess.Popen, timeout_s: float = 30.0) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        line = node.stderr.readline()
        if "configured" in line:
            return True
        if not line and node.poll() is not None:
            return False
    return False


def run_night_shift(args: argparse.Namespace) -> int:
    """The demo's steps, in order."""
    started = time.monotonic()
    print("helpaware demo: invented hospital night shift (a supply robot, 40 staff), sped up")
    with tempfile.TemporaryDirectory(prefix="helpaware-demo-") as store_dir:
        # 1. the decision node, as a robot would run it
        node = start_node(args.namespace, store_dir)
        try:
            if not wait_configured(node):
                print("demo: the decision node did not start:")
                print(node.stderr.read() if node.poll() is not None else "(no output)")
                return 1
            print(f"node up in {args.namespace} (site parameters config/hospital_night.yaml)\n")
            recorder = record_and_review.start_recorder(args.namespace, os.path.join(store_dir, "site_key"))
            # 2. the scenario process: owns /clock, shows people, opens needs, answers asks
            scenario = subprocess.run(
                [sys.executable, "-m", "helpaware_node.demo.night_shift",
                 "--namespace", args.namespace, "--needs", str(args.needs),
                 "--seed", str(args.seed)], timeout=120)
            bag = record_and_review.stop_recorder(recorder)
        finally:
            # 3. stop the node cleanly (it keeps what it learned in its store until here)
            code = launch_config.stop(node)
    # 4. report
    print(f"\nnode exited with code {code}; demo took {time.monotonic() - started:.1f} s")
    record_and_review.review_bag(bag)
    return scenario.returncode or (0 if code == 0 else 1)
