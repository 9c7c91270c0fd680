"""`helpaware demo`: the decision node as a process, driven by the night-shift scenario.

Steps (one function, in order, so later steps can be added at the end): start the node from
launch_config with the demo site's parameters and sim time; run the scenario process, which
owns the clock and prints each decision live; stop the node cleanly; report.
`helpaware demo --core-only` prints the scripted core-only table instead (no ROS).
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

from ..ros import launch_config
from . import demo_core, review_demo


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--seed", type=int, default=11, help="seed of the invented night shift")
    parser.add_argument("--needs", type=int, default=90, help="help needs in the night")
    parser.add_argument("--core-only", action="store_true",
                        help="only the scripted core table (no ROS processes)")
    parser.add_argument("--namespace", default="/demo_robot", help="namespace of the node")


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
            recorder = review_demo.start_recorder(args.namespace, os.path.join(store_dir, "site_key"))
            # 2. the scenario process: owns /clock, shows people, opens needs, answers asks
            scenario = subprocess.run(
                [sys.executable, "-m", "helpaware_node.tools.demo_scenario",
                 "--namespace", args.namespace, "--needs", str(args.needs),
                 "--seed", str(args.seed)], timeout=120)
            bag = review_demo.stop_recorder(recorder)
        finally:
            # 3. stop the node cleanly (it keeps what it learned in its store until here)
            code = launch_config.stop(node)
    # 4. report
    print(f"\nnode exited with code {code}; demo took {time.monotonic() - started:.1f} s")
    review_demo.review_bag(bag)
    return scenario.returncode or (0 if code == 0 else 1)


def run(args: argparse.Namespace) -> int:
    if args.core_only:
        demo_core.run(seed=7)
        return 0
    return run_night_shift(args)
