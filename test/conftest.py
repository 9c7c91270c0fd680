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

"""Test configuration: keep every rclpy process of the run on loopback and its own domain."""
import fcntl
import os
import random
import tempfile

from hypothesis import HealthCheck, settings
import pytest

# Set here, not inherited: DDS stays on loopback, and this run does not hear parallel runs.
os.environ["ROS_AUTOMATIC_DISCOVERY_RANGE"] = "LOCALHOST"
os.environ.pop("ROS_LOCALHOST_ONLY", None)


def _claim_domain_id() -> int:
    """Claim a domain id in the Linux-safe range 1-101 that no other test run here holds.

    Each run keeps an exclusive lock on a file named after its id until it exits, so
    concurrent runs never share a domain; random order keeps runs from queueing on one id.
    """
    ids = list(range(1, 102))
    random.SystemRandom().shuffle(ids)
    for domain_id in ids:
        path = os.path.join(tempfile.gettempdir(), f"helpaware-ros-domain-{domain_id}.lock")
        handle = open(path, "a")
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            handle.close()
            continue
        _DOMAIN_LOCKS.append(handle)   # held (open) for the life of this run
        return domain_id
    return ids[0]   # every id taken: share one rather than refuse to test


_DOMAIN_LOCKS: list = []
os.environ["ROS_DOMAIN_ID"] = str(_claim_domain_id())

# A slow, noisy 2-core machine: no per-example deadlines.
settings.register_profile("ci", deadline=None, max_examples=200,
                          suppress_health_check=[HealthCheck.too_slow])
# `make check` (quick checks for contributors) draws fewer examples; `make test` all of them
settings.register_profile("quick", parent=settings.get_profile("ci"), max_examples=30)
settings.load_profile(os.environ.get("HELPAWARE_HYPOTHESIS_PROFILE", "ci"))

DATA_DIR = os.path.join(os.path.dirname(__file__), "data")


@pytest.fixture
def data_dir():
    return DATA_DIR


@pytest.fixture(autouse=True)
def _own_ros_home(tmp_path_factory, monkeypatch):
    """Each test gets its own ROS home.

    So a node's default store file never crosses tests and nothing is written under the real
    ~/.ros.
    """
    monkeypatch.setenv("ROS_HOME", str(tmp_path_factory.mktemp("ros_home")))


@pytest.fixture(scope="module")
def ctx():
    """Return an rclpy context of its own for each module of node tests."""
    import rclpy
    context = rclpy.Context()
    rclpy.init(context=context)
    yield context
    rclpy.shutdown(context=context)
