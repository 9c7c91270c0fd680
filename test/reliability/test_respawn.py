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

"""A decision node killed with SIGKILL and started again, 10 times, against inputs that stay up.

The long-lived side is a process of its own (long_lived_inputs.py: `people` at 10 Hz, help
needs on `task_status`, answers on `outcome`), started once, as perception and the behaviour
layer are on a robot.  The node is started through ros/launch_config.py (process_rig.start_node,
as the launch file starts it) on one SQLite store.  Required:
- every restart answers a help need: a decision with every person in view among its candidates
  (bounded wait; the time it takes is bench/bench_respawn.py's business, not asserted here);
- afterwards no shared-memory file of a killed instance is left.  The files are listed by this
  test itself, from /proc/<pid>/fd and /proc/<pid>/maps of each instance before it is killed,
  with their inode; "left" means the same file (same inode) still exists and no live process
  holds its lock (/proc/locks).  The instances before the last are cleaned by the next start;
  the last one by `helpaware shm-sweep`, the documented command.
"""
import os
import subprocess
import sys

import pytest

pytest.importorskip("rclpy")

# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from long_lived_inputs import LongLivedProcess  # noqa: E402,I100
from process_rig import kill_hard, start_node, stop_gently  # noqa: E402

pytestmark = pytest.mark.ros

RESTARTS = 10
NAMESPACE = "/respawn_test"
ANSWER_DEADLINE_S = 90.0          # a deaf restart fails here (bounded), whatever its cause


def shm_files_of(pid: int) -> dict:
    """Path -> inode of every Fast DDS file in /dev/shm the process has open or mapped."""
    found = {}
    for fd in os.listdir(f"/proc/{pid}/fd"):
        try:
            target = os.readlink(f"/proc/{pid}/fd/{fd}")
        except OSError:
            continue
        if target.startswith("/dev/shm/") and "fastdds_" in target:
            found[target] = os.stat(target).st_ino
    with open(f"/proc/{pid}/maps") as fh:
        for line in fh:
            parts = line.split(maxsplit=5)
            path = parts[5].strip() if len(parts) == 6 else ""
            if path.startswith("/dev/shm/") and "fastdds_" in path and os.path.exists(path):
                found[path] = os.stat(path).st_ino
    return found


def in_this_domain(path: str) -> bool:
    """Return the data segments (random names).

    Ports of this run's domain, which test/conftest.py holds for this run alone (RTPS port numbers:
    7400 + 250 * domain + offset).  Fast DDS also gives each participant a port numbered from 7000
    across the whole machine; once its owner is dead, a participant of another test run on this
    machine may take it over (the sweep then leaves it to that one, rightly) and leave it at its
    own exit: not checked here.
    """
    name = os.path.basename(path)
    if not name.startswith("fastdds_port"):
        return True
    domain = int(os.environ["ROS_DOMAIN_ID"])
    number = int(name[len("fastdds_port"):].split("_")[0])
    return 7400 + 250 * domain <= number < 7400 + 250 * (domain + 1)


def own_sets(pid: int, files: dict) -> dict:
    """Only the sets the instance owned.

    Those whose `_el` lock it held (the rest, mapped to write into other participants' ports or
    read their data, belong to those).
    """
    locked = flock_inodes(pid)
    own = {}
    for path, ino in files.items():
        if path.endswith("_el") and ino in locked and in_this_domain(path):
            base = path[:-3]
            name = os.path.basename(base)
            for member in (base, path, f"/dev/shm/sem.{name}_mutex"):
                if member in files or os.path.exists(member):
                    own[member] = files.get(member, os.stat(member).st_ino)
    return own


def flock_inodes(pid=None) -> set:
    """Inodes with a flock held (by `pid`, or by anyone), read from /proc/locks."""
    out = set()
    with open("/proc/locks") as fh:
        for line in fh:
            parts = line.split()
            if len(parts) >= 6 and parts[1] == "FLOCK" and (pid is None or parts[4] == str(pid)):
                out.add(int(parts[5].rsplit(":", 1)[1]))
    return out


def leftovers(recorded: dict) -> list:
    """Return recorded files still there (same inode) whose set nobody holds locked now."""
    held = flock_inodes()
    left = []
    for path, ino in recorded.items():
        try:
            now = os.stat(path).st_ino
        except FileNotFoundError:
            continue
        if now != ino:
            continue                      # another file under that name now: not the instance's
        name = os.path.basename(path)
        lock = path if path.endswith("_el") else (
            f"/dev/shm/{name[4:-6]}_el" if name.startswith("sem.") else path + "_el")
        try:
            if os.stat(lock).st_ino in held:
                continue                  # a live participant took that port over
        except FileNotFoundError:
            pass
        left.append(path)
    return left


def test_every_restart_answers_and_no_shared_memory_of_the_killed_is_left(tmp_path):
    log = tmp_path / "node.log"
    store = tmp_path / "beliefs.sqlite3"
    inputs = LongLivedProcess(NAMESPACE)
    killed: dict = {}
    proc = None
    try:
        for run in range(RESTARTS + 1):           # the first start, then 10 restarts
            proc = start_node(store, "respawn-robot", NAMESPACE, log)
            inputs.probe(f"run{run}")
            answer = inputs.wait_probe(f"run{run}", ANSWER_DEADLINE_S)
            assert answer is not None, (
                f"start {run} answered no help need within {ANSWER_DEADLINE_S:.0f} s; "
                f"log:\n{log.read_text()[-3000:]}")
            assert answer["action"] in ("ask", "continue")
            if run == 0 and "FASTDDS_DEFAULT_PROFILES_FILE" not in os.environ:
                # started as the launch file starts it: on the robot's middleware profile
                with open(f"/proc/{proc.pid}/environ", "rb") as fh:
                    environ = dict(x.split(b"=", 1) for x in fh.read().split(b"\0") if b"=" in x)
                assert environ[b"FASTDDS_DEFAULT_PROFILES_FILE"].endswith(b"fastdds_robot.xml")
            if run < RESTARTS:
                killed.update(own_sets(proc.pid, shm_files_of(proc.pid)))
                kill_hard(proc)
                proc = None
        # every killed instance before this one was cleaned by the start that followed it
        assert killed and leftovers(killed) == [], leftovers(killed)
        last = own_sets(proc.pid, shm_files_of(proc.pid))
        assert any(p.endswith("_el") for p in last), last    # the test sees the sets at all
        kill_hard(proc)
        proc = None
        segment = [p for p in last if "fastdds_port" not in p and not p.endswith(("_el",
                                                                                  "_mutex"))]
        assert segment and set(segment) <= set(leftovers(last))   # a kill leaves its files
        sweep = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "shm-sweep"],
                               capture_output=True, text=True, timeout=60)
        assert sweep.returncode == 0, sweep.stderr
        assert "left by 1 dead instance(s)" in sweep.stdout, sweep.stdout
        killed.update(last)
        inputs_own = own_sets(inputs.proc.pid, shm_files_of(inputs.proc.pid))
    finally:
        if proc is not None:
            stop_gently(proc)
        inputs.stop()
    assert leftovers(killed) == [], leftovers(killed)
    # and the long-lived process, stopped cleanly, left nothing either (its ports outlive a
    # clean exit when a killed node had written to them; it removes them itself)
    assert inputs_own and leftovers(inputs_own) == [], (leftovers(inputs_own), inputs.exit_sweep)
    assert "Traceback" not in log.read_text()
