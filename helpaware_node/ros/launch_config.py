"""How the decision node is launched: executable, parameter file, remaps, in one place.

`launch/helpaware.launch.py` (ROS 2 installs), the cross-process tests, the demo and the
benchmark all start the node from here, so they cannot drift apart.  No launch import here.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
from typing import Mapping, Optional, Sequence

PACKAGE = "helpaware_node"
EXECUTABLE = "helpaware_decider"
NODE_NAME = "helpaware_decider"
DEFAULT_PARAMS_FILE = "default.yaml"
SITE_PARAMS_FILE = "hospital_night.yaml"
# the robot's Fast DDS profile (docs/integration.md "Respawn"); set for the node unless the
# caller's environment names a profile of its own
MIDDLEWARE_PROFILE_FILE = "fastdds_robot.xml"
PROFILE_ENV = "FASTDDS_DEFAULT_PROFILES_FILE"
PROFILE_ENV_OLD = "FASTRTPS_DEFAULT_PROFILES_FILE"

# (from, to): the node's relative topic names, remapped onto a typical robot's topics.
# Identity by default; an integrator edits the right-hand side (see docs/integration.md).
REMAPS: tuple[tuple[str, str], ...] = (
    ("people", "people"),
    ("task_status", "task_status"),
    ("outcome", "outcome"),
    ("decision", "decision"),
    ("markers", "markers"),
)


def config_dir() -> str:
    """The installed share/<package>/config if present, else the source tree's config/."""
    try:
        from ament_index_python.packages import get_package_share_directory  # ROS install
        installed = os.path.join(get_package_share_directory(PACKAGE), "config")
        if os.path.isdir(installed):
            return installed
    except Exception:
        pass
    for base in (os.path.join(sys.prefix, "share", PACKAGE, "config"),
                 os.path.join(os.path.dirname(__file__), "..", "..", "config")):
        if os.path.isfile(os.path.join(base, DEFAULT_PARAMS_FILE)):
            return os.path.abspath(base)
    return os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..", "config"))


def params_file(name: str = DEFAULT_PARAMS_FILE) -> str:
    return name if os.path.isabs(name) else os.path.join(config_dir(), name)


def middleware_profile() -> str:
    """The shipped Fast DDS profile for the whole robot ('' if it is not installed)."""
    path = os.path.join(config_dir(), MIDDLEWARE_PROFILE_FILE)
    return path if os.path.isfile(path) else ""


def profile_environment(base: Mapping[str, str]) -> dict:
    """What to add to `base` for the robot's middleware profile: nothing when `base` names a
    profile of its own (or the file is not installed)."""
    if base.get(PROFILE_ENV) or base.get(PROFILE_ENV_OLD) or not middleware_profile():
        return {}
    return {PROFILE_ENV: middleware_profile()}


def executable() -> list[str]:
    """The console script beside this Python (venv), on PATH (ROS install), else `-m`."""
    for here in (os.path.join(os.path.dirname(sys.executable), EXECUTABLE),
                 os.path.join(sys.prefix, "lib", PACKAGE, EXECUTABLE)):   # ament_python layout
        if os.access(here, os.X_OK):
            return [here]
    found = shutil.which(EXECUTABLE)
    return [found] if found else [sys.executable, "-m", "helpaware_node.ros.node"]


def ros_arguments(params: Optional[str] = None, namespace: str = "",
                  remaps: Sequence[tuple[str, str]] = REMAPS,
                  overrides: Optional[Mapping[str, object]] = None) -> list[str]:
    args = ["--ros-args", "-r", f"__node:={NODE_NAME}",
            "--params-file", params_file(params or DEFAULT_PARAMS_FILE)]
    if namespace:
        args += ["-r", f"__ns:={namespace}"]
    for src, dst in remaps:
        if src != dst:
            args += ["-r", f"{src}:={dst}"]
    for k, v in (overrides or {}).items():
        text = ("true" if v else "false") if isinstance(v, bool) else str(v)
        args += ["-p", f"{k}:={text}"]
    return args


def command(**kwargs) -> list[str]:
    return executable() + ros_arguments(**kwargs)


def start(stdout=None, stderr=None, env: Optional[Mapping[str, str]] = None,
          **kwargs) -> subprocess.Popen:
    """Start the node as a separate process (inherits ROS_DOMAIN_ID and discovery range; the
    middleware profile as `profile_environment` says)."""
    base = dict(env if env is not None else os.environ)
    return subprocess.Popen(command(**kwargs), stdout=stdout, stderr=stderr,
                            env={**base, **profile_environment(base)}, text=True)


def stop(proc: subprocess.Popen, timeout_s: float = 20.0) -> int:
    """SIGINT (as Ctrl-C, a clean shutdown), then SIGKILL if it does not exit in time."""
    if proc.poll() is None:
        proc.send_signal(signal.SIGINT)
        try:
            proc.wait(timeout=timeout_s)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
    return proc.returncode
