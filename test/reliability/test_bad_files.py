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

"""Bad files given to the node process, the store and the review tool.

Already checked elsewhere, not repeated here (see docs/RELIABILITY.md):
wrong-typed / out-of-range parameter file through `-m helpaware_node.ros.node` (test_params.py),
world-readable site key refused by the store and by `helpaware store` (test_store_sqlite.py,
test_store_admin.py), damaged store file moved aside (test_store_sqlite.py), truncated bag and
missing bag path given to `helpaware review` (test_review_report.py), garbage bag to the reader
(test_bag_io.py).
"""
import os
import random
import subprocess
import sys

from helpaware_node.ros import launch_config
import pytest

pytestmark = pytest.mark.ros


def _run_node(params_path=None, overrides=None, timeout_s=60):
    """Start the node the way launch files do; a refused start must exit on its own."""
    proc = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                               params=str(params_path) if params_path else None,
                               overrides=overrides)
    try:
        out, err = proc.communicate(timeout=timeout_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
        pytest.fail(f"node did not exit on a bad file: {err[-1000:]}")
    return proc.returncode, err


def _params(tmp_path, body):
    path = tmp_path / "site.yaml"
    path.write_text(f"{launch_config.NODE_NAME}:\n  ros__parameters:\n{body}")
    return path


def test_corrupt_yaml_exits_non_zero_naming_the_file(tmp_path):
    path = _params(tmp_path, "    k_busy: [1.0\n   broken: : :\n")
    rc, err = _run_node(path)
    assert rc != 0
    assert str(path) in err


def test_corrupt_yaml_gives_a_message_not_a_traceback(tmp_path):
    path = _params(tmp_path, "    k_busy: [1.0\n   broken: : :\n")
    rc, err = _run_node(path)
    assert rc == 2 and "Traceback" not in err, err[-2000:]
    assert "cannot start" in err and str(path) in err     # the file is named


@pytest.mark.parametrize("line, name", [
    ("    max_asks_per_hour: 3.5\n", "max_asks_per_hour"),      # a double for an integer
    ('    max_distance_m: "far"\n', "max_distance_m"),        # a string for a double
    ("    use_sim_time: 1\n", "use_sim_time"),   # rclpy's own parameter (a traceback before)
])
def test_wrong_typed_parameter_file_names_the_parameter(tmp_path, line, name):
    rc, err = _run_node(_params(tmp_path, line))
    assert rc == 2, err[-2000:]
    assert "parameters refused" in err and name in err
    assert "Traceback" not in err


def _stderr_until(proc, text, deadline_s=60.0):
    """Read the process's stderr until `text` appears or the deadline passes (bounded)."""
    import select
    import time
    seen = ""
    end = time.monotonic() + deadline_s
    while text not in seen and time.monotonic() < end and proc.poll() is None:
        ready, _, _ = select.select([proc.stderr], [], [], 0.5)
        if ready:
            seen += proc.stderr.readline()
    return seen


def test_node_refuses_a_world_readable_site_key(tmp_path):
    """Started on its own (autostart, the default).

    The node exits 2 with one line naming the key and the chmod to run; the key is left as it was
    and the store is not written.
    """
    store = tmp_path / "beliefs.sqlite3"
    key = tmp_path / "site_key"
    key.write_bytes(os.urandom(32))
    os.chmod(key, 0o644)
    code, err = _run_node(overrides={"store_path": str(store)})
    assert code == 2, err[-2000:]
    assert f"chmod 600 {key}" in err and "not started" in err, err[-2000:]
    assert "Traceback" not in err
    assert key.stat().st_mode & 0o777 == 0o644       # not silently "fixed" or replaced
    assert not store.exists() or store.stat().st_size == 0


def test_node_refuses_a_site_key_that_is_a_directory(tmp_path):
    store = tmp_path / "beliefs.sqlite3"
    (tmp_path / "site_key").mkdir()
    code, err = _run_node(overrides={"store_path": str(store)})
    assert code == 2 and "is a directory" in err and str(tmp_path / "site_key") in err, err
    assert "Traceback" not in err


def test_managed_node_with_a_bad_key_stays_up_unconfigured(tmp_path):
    """With autostart:=false a lifecycle manager owns the transitions.

    a failed configure leaves the node up, unconfigured, for the manager to report or retry.
    """
    store = tmp_path / "beliefs.sqlite3"
    key = tmp_path / "site_key"
    key.write_bytes(os.urandom(32))
    os.chmod(key, 0o644)
    proc = launch_config.start(stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                               overrides={"store_path": str(store), "autostart": False})
    try:
        try:
            proc.wait(timeout=3)
        except subprocess.TimeoutExpired:
            pass
        assert proc.poll() is None          # still up: nothing configured it yet
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


UNREADABLE_KEY_READER = r"""
import os, sys
from helpaware_node.store.keys import SiteKeyError, load_site_key
os.setgid(65534); os.setuid(65534)          # the 'nobody' user: not the key's owner
try:
    load_site_key(sys.argv[1], create=False)
except SiteKeyError as exc:
    print(exc)
    sys.exit(3)
sys.exit(0)
"""


def test_unreadable_site_key_is_a_site_key_error_naming_what_to_do(tmp_path):
    """Mode 0600 owned by another user.

    The tests run as root here, where a mode never stops a read, so the reader drops to the
    'nobody' user first (skipped where that is not possible); run as a normal user, mode 000 does
    the same.
    """
    key = tmp_path / "site_key"
    key.write_bytes(os.urandom(32))
    os.chmod(key, 0o600)
    if os.geteuid() == 0:
        os.chmod(tmp_path, 0o755)
        cmd = [sys.executable, "-c", UNREADABLE_KEY_READER, str(key)]
    else:
        os.chmod(key, 0o000)
        cmd = [sys.executable, "-c", UNREADABLE_KEY_READER.replace(
            "os.setgid(65534); os.setuid(65534)", "pass"), str(key)]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=60)
    if os.geteuid() == 0 and "Operation not permitted" in proc.stderr:
        pytest.skip("cannot drop to the nobody user here")
    assert proc.returncode == 3, proc.stderr[-2000:]
    assert str(key) in proc.stdout and "cannot be read by this user" in proc.stdout
    assert "chown" in proc.stdout and "Traceback" not in proc.stderr


@pytest.mark.parametrize("content", [b"", b"\x89MCAP0\r\n" + b"\x00" * 64,
                                     random.Random(8).randbytes(4096)],
                         ids=["empty", "magic_then_zeros", "random_bytes"])
def test_garbage_bag_to_review_names_the_file(tmp_path, content):
    bag = tmp_path / "night"
    bag.mkdir()
    mcap = bag / "night_0.mcap"
    mcap.write_bytes(content)
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "review", str(bag),
                           "--out", str(tmp_path / "out")], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode != 0, proc.stdout[-1000:]
    assert str(bag) in proc.stderr, proc.stderr[-2000:]
    assert "Traceback" not in proc.stderr
