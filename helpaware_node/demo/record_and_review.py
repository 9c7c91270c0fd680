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

"""The demo's recording and review steps: record the run with `helpaware record`, then review.

The bag and the report go to out/demo/ (replaced at each run).  Person ids are hashed with the
demo store's own site key, as on a robot.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
from typing import Optional

OUT_DIR = os.path.join("out", "demo")
BAG_NAME = "night_shift_bag"
REPORT_NAME = "review"


def start_recorder(namespace: str, site_key_file: str, out_dir: str = OUT_DIR,
                   timeout_s: float = 20.0) -> Optional[subprocess.Popen]:
    """Start `helpaware record` and wait until its subscriptions exist (first progress line)."""
    bag = os.path.abspath(os.path.join(out_dir, BAG_NAME))
    if os.path.isdir(bag):
        shutil.rmtree(bag)            # our own artefact of an earlier demo run
    os.makedirs(os.path.dirname(bag), exist_ok=True)
    cmd = [sys.executable, "-m", "helpaware_node.cli", "record", "-o", bag, "--namespace",
           namespace, "--use-sim-time", "--duration", "600"]
    if os.path.exists(site_key_file):
        cmd += ["--site-key-file", site_key_file]
    else:
        print(f"demo: no site key at {site_key_file}; recording with raw ids")
        cmd += ["--keep-raw-ids"]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    assert proc.stderr is not None
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        line = proc.stderr.readline()
        if line.startswith("recording"):
            return proc
        if not line and proc.poll() is not None:
            break
    print("demo: the recorder did not start; continuing without a bag")
    if proc.poll() is None:
        proc.kill()
    return None


def stop_recorder(proc: Optional[subprocess.Popen]) -> Optional[str]:
    """Stop as a service manager would (SIGINT); returns the bag path when it was written."""
    if proc is None:
        return None
    proc.send_signal(signal.SIGINT)
    try:
        out, err = proc.communicate(timeout=30)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
    for line in err.splitlines():     # what the recorder could not record, if anything
        if "not recorded" in line or "warning" in line.lower():
            print(f"recorder: {line.strip()}")
    bag = os.path.abspath(os.path.join(OUT_DIR, BAG_NAME))
    if proc.returncode != 0 or not os.path.exists(os.path.join(bag, "metadata.yaml")):
        print(f"demo: recorder exited with code {proc.returncode}; no bag")
        return None
    print(out.strip().splitlines()[-1] if out.strip() else f"bag written: {bag}")
    return bag


def review_bag(bag: Optional[str], out_dir: str = OUT_DIR) -> int:
    if bag is None:
        return 1
    from ..review.report import build, summary_text
    report_dir = os.path.abspath(os.path.join(out_dir, REPORT_NAME))
    print("\nreview of the recorded run:")
    summary = build(bag, report_dir)
    sys.stdout.write(summary_text(summary, report_dir))
    print(f"open {os.path.join(report_dir, 'report.html')} in a browser "
          "(summary.json and decisions.csv beside it)")
    return 0
