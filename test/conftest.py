"""Test configuration: keep every rclpy process of the run on loopback and its own domain."""
import os
import random

import pytest
from hypothesis import HealthCheck, settings

# Set here, not inherited: DDS stays on loopback, and this run does not hear parallel runs.
os.environ["ROS_AUTOMATIC_DISCOVERY_RANGE"] = "LOCALHOST"
os.environ.pop("ROS_LOCALHOST_ONLY", None)
os.environ["ROS_DOMAIN_ID"] = str(random.SystemRandom().randint(1, 101))  # Linux-safe range

# A slow, noisy 2-core machine: no per-example deadlines.
settings.register_profile("ci", deadline=None, max_examples=200,
                          suppress_health_check=[HealthCheck.too_slow])
settings.load_profile("ci")

DATA_DIR = os.path.join(os.path.dirname(__file__), "data")


@pytest.fixture
def data_dir():
    return DATA_DIR


@pytest.fixture(autouse=True)
def _own_ros_home(tmp_path_factory, monkeypatch):
    """Each test gets its own ROS home, so a node's default store file never crosses tests
    and nothing is written under the real ~/.ros."""
    monkeypatch.setenv("ROS_HOME", str(tmp_path_factory.mktemp("ros_home")))


@pytest.fixture(scope="module")
def ctx():
    """An rclpy context of its own for each module of node tests (imported only when used)."""
    import rclpy
    context = rclpy.Context()
    rclpy.init(context=context)
    yield context
    rclpy.shutdown(context=context)
