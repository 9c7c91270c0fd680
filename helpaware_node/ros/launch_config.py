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

"""How the package's nodes are started: executables, parameter files, remaps, launch arguments.

The one source of node command lines. `launch/helpaware.launch.py` and
`launch/example_loop.launch.py` (through launch_ros), the demo, the benchmarks and the process
tests (through `command()` and `start()`) all build their nodes from a `NodeSpec` made here,
so they cannot drift apart. No launch import here: launch_ros is needed only by the launch
files, and the rest runs without it.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import os
import signal
import subprocess
import sys
from typing import Any, Mapping, Optional, Sequence

import yaml

from .. import package_data

PACKAGE = package_data.PACKAGE
EXECUTABLE = "helpaware_decider"
NODE_NAME = "helpaware_decider"
MODULE = "helpaware_node.ros.node"
DEFAULT_PARAMS_FILE = "default.yaml"
SITE_PARAMS_FILE = "hospital_night.yaml"
# the robot's Fast DDS profile (docs/integration.md "Respawn"): set for the nodes started here
# unless the environment names a profile of its own
MIDDLEWARE_PROFILE_FILE = "fastdds_robot.xml"
PROFILE_ENV = "FASTDDS_DEFAULT_PROFILES_FILE"
PROFILE_ENV_OLD = "FASTRTPS_DEFAULT_PROFILES_FILE"

# (from, to): the node's relative topic names, remapped onto a typical robot's topics.
# Identity by default; each is a launch argument <from>_topic (docs/integration.md).
REMAPS: tuple[tuple[str, str], ...] = (
    ("people", "people"),
    ("task_status", "task_status"),
    ("outcome", "outcome"),
    ("decision", "decision"),
    ("markers", "markers"),
)

# The example stand-ins (helpaware_node/ros/examples/): executable -> (module, node name)
EXAMPLES = {
    "example_perception": ("helpaware_node.ros.examples.perception", "example_perception"),
    "example_behaviour_layer": ("helpaware_node.ros.examples.behaviour_layer",
                                "behaviour_layer"),
    "example_ask_delivery": ("helpaware_node.ros.examples.ask_delivery", "ask_delivery"),
}


class LaunchArgumentError(ValueError):
    """A launch argument has a value outside what it allows; the message names it."""


@dataclass(frozen=True)
class LaunchArgument:
    name: str
    default: str
    description: str


# launch/helpaware.launch.py declares exactly these (the table in docs/integration.md)
DECIDER_ARGUMENTS: tuple[LaunchArgument, ...] = (
    LaunchArgument("params_file", DEFAULT_PARAMS_FILE,
                   "parameter file: a name in the package's config/ or a path"),
    LaunchArgument("namespace", "", "namespace of the node, e.g. robot1"),
    *(LaunchArgument(f"{src}_topic", dst, f"topic the node's `{src}` is remapped to")
      for src, dst in REMAPS),
    LaunchArgument("use_sim_time", "false",
                   "true: decide in /clock time (simulation, bag replay)"),
    LaunchArgument("respawn", "false", "true: start the node again when it dies"),
    LaunchArgument("respawn_delay_s", "2.0", "seconds before a respawn"),
)
# launch/example_loop.launch.py: the decider's arguments plus the stand-ins' own
LOOP_ARGUMENTS: tuple[LaunchArgument, ...] = DECIDER_ARGUMENTS[:2] + (
    LaunchArgument("stuck_period_s", "15.0",
                   "seconds between the help needs the behaviour-layer stand-in opens"),
    LaunchArgument("answer", "helped",
                   "what the ask-delivery stand-in reports: helped, declined, no_response "
                   "or could_not_ask"),
)


def config_dir() -> str:
    """Return the installed share/<package>/config, else the source tree's config/."""
    return package_data.data_dir("config")


def params_file(name: str = DEFAULT_PARAMS_FILE) -> str:
    """Return a parameter file by name (config/) or by path (see package_data.data_file)."""
    return package_data.data_file("config", name)


def middleware_profile() -> str:
    """Return the shipped Fast DDS profile for the whole robot ('' if it is not installed)."""
    path = os.path.join(config_dir(), MIDDLEWARE_PROFILE_FILE)
    return path if os.path.isfile(path) else ""


def profile_environment(base: Mapping[str, str]) -> dict:
    """Return what to add to `base` for the robot's middleware profile.

    Nothing when `base` names a profile of its own (or the file is not installed).
    """
    if base.get(PROFILE_ENV) or base.get(PROFILE_ENV_OLD) or not middleware_profile():
        return {}
    return {PROFILE_ENV: middleware_profile()}


def executable(name: str = EXECUTABLE) -> list[str]:
    """Return the command that starts the installed executable.

    The installed executable (lib/<package>/<name> under the ament prefix or the venv), else
    `python -m` on the module, so a plain source checkout still runs.
    """
    found = package_data.executable(name)
    if found:
        return [found]
    module = MODULE if name == EXECUTABLE else EXAMPLES[name][0]
    return [sys.executable, "-m", module]


def _ros_value(value: object) -> str:
    """Return the text of one `-p name:=value`, which rcl reads as YAML.

    A string YAML would read as something else (off, yes, 1.5, null, the empty string) is
    quoted, so `site_learning: "off"` reaches the node as the string it is, not as false.
    """
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        try:
            plain = yaml.safe_load(value) == value
        except yaml.YAMLError:
            plain = False
        if not plain:
            return "'" + value.replace("'", "''") + "'"
    return str(value)


@dataclass(frozen=True)
class NodeSpec:
    """One node as it is started: by launch_ros (launch_kwargs) or as a process (command)."""

    executable: str
    name: str
    namespace: str = ""
    params_file: Optional[str] = None          # resolved path
    remaps: tuple[tuple[str, str], ...] = ()   # only those that change a name
    overrides: Mapping[str, object] = field(default_factory=dict)
    respawn: bool = False
    respawn_delay_s: float = 0.0

    @property
    def fully_qualified_namespace(self) -> str:
        ns = self.namespace.strip("/")
        return f"/{ns}" if ns else ""

    def ros_arguments(self) -> list[str]:
        args = ["--ros-args", "-r", f"__node:={self.name}"]
        if self.params_file:
            args += ["--params-file", self.params_file]
        if self.fully_qualified_namespace:
            args += ["-r", f"__ns:={self.fully_qualified_namespace}"]
        for src, dst in self.remaps:
            args += ["-r", f"{src}:={dst}"]
        for key, value in self.overrides.items():
            args += ["-p", f"{key}:={_ros_value(value)}"]
        return args

    def command(self) -> list[str]:
        """Return the process's command line (what `ros2 run` would start, with these args)."""
        return executable(self.executable) + self.ros_arguments()

    def launch_kwargs(self) -> dict:
        """Return the keyword arguments of launch_ros.actions.Node for this node.

        Keyword arguments of launch_ros.actions.Node for this node (see LAUNCH_ROS_NODE_KWARGS for
        the releases they exist in).
        """
        parameters: list = [self.params_file] if self.params_file else []
        if self.overrides:
            parameters.append(dict(self.overrides))
        kwargs: dict[str, Any] = {
            "package": PACKAGE, "executable": self.executable, "name": self.name,
            "namespace": self.fully_qualified_namespace or None, "parameters": parameters,
            "remappings": list(self.remaps)}
        if self.respawn:
            kwargs.update(respawn=True, respawn_delay=self.respawn_delay_s)
        profile = profile_environment(os.environ)   # launch's environment, which nodes inherit
        if profile:
            kwargs["additional_env"] = profile
        return kwargs


# launch_ros.actions.Node keywords that launch_kwargs() may use. All exist in Humble, Jazzy and
# Kilted (Node's own: package, executable, name, namespace, parameters, remappings; passed on to
# launch's ExecuteProcess: respawn, respawn_delay, additional_env, output). Checked against the
# vendored launch_ros 0.28.0 / launch 3.7.1 by test/test_launch_files_static.py; Humble from
# memory.
LAUNCH_ROS_NODE_KWARGS = frozenset({"package", "executable", "name", "namespace", "parameters",
                                    "remappings", "respawn", "respawn_delay", "additional_env",
                                    "output"})


def decider(params: Optional[str] = None, namespace: str = "",
            remaps: Sequence[tuple[str, str]] = REMAPS,
            overrides: Optional[Mapping[str, object]] = None,
            respawn: bool = False, respawn_delay_s: float = 0.0) -> NodeSpec:
    """Return the decision node, with a parameter file from config/ (by name) or a path."""
    return NodeSpec(EXECUTABLE, NODE_NAME, namespace, params_file(params or DEFAULT_PARAMS_FILE),
                    tuple((s, d) for s, d in remaps if s != d), dict(overrides or {}),
                    respawn, respawn_delay_s)


def example(executable_name: str, namespace: str = "",
            overrides: Optional[Mapping[str, object]] = None) -> NodeSpec:
    """One of the example stand-ins (perception, behaviour layer, ask delivery)."""
    if executable_name not in EXAMPLES:
        raise LaunchArgumentError(f"unknown example {executable_name!r}: one of "
                                  + ", ".join(EXAMPLES))
    return NodeSpec(executable_name, EXAMPLES[executable_name][1], namespace,
                    overrides=dict(overrides or {}))


def _bool_argument(values: Mapping[str, str], name: str) -> bool:
    text = str(values.get(name, "false")).strip().lower()
    if text not in ("true", "false"):
        raise LaunchArgumentError(f"{name}: {text!r} is not one of true, false")
    return text == "true"


def _float_argument(values: Mapping[str, str], name: str, default: str,
                    low: float, high: float) -> float:
    text = str(values.get(name, default))
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not low <= value <= high:
        raise LaunchArgumentError(f"{name}: {text!r} is not a number in [{low:g}, {high:g}]")
    return value


def decider_from_arguments(values: Mapping[str, str]) -> NodeSpec:
    """Return the decider from launch argument values (strings, as `ros2 launch` passes them)."""
    defaults = {a.name: a.default for a in DECIDER_ARGUMENTS}
    get = lambda name: str(values.get(name, defaults[name]))  # noqa: E731
    overrides = {"use_sim_time": True} if _bool_argument(values, "use_sim_time") else {}
    respawn = _bool_argument(values, "respawn")
    delay = _float_argument(values, "respawn_delay_s", defaults["respawn_delay_s"], 0.0, 3600.0)
    remaps = [(src, get(f"{src}_topic")) for src, _ in REMAPS]
    for src, dst in remaps:
        if not dst.strip():
            raise LaunchArgumentError(f"{src}_topic: empty; give a topic name")
    return decider(get("params_file"), get("namespace"), remaps, overrides, respawn, delay)


RESULTS = ("helped", "declined", "no_response", "could_not_ask")


def loop_from_arguments(values: Mapping[str, str]) -> list[NodeSpec]:
    """Return the decider and the three stand-ins, for launch/example_loop.launch.py."""
    defaults = {a.name: a.default for a in LOOP_ARGUMENTS}
    ns = str(values.get("namespace", defaults["namespace"]))
    period = _float_argument(values, "stuck_period_s", defaults["stuck_period_s"], 1.0, 86400.0)
    answer = str(values.get("answer", defaults["answer"]))
    if answer not in RESULTS:
        raise LaunchArgumentError(f"answer: {answer!r} is not one of {', '.join(RESULTS)}")
    return [decider(str(values.get("params_file", defaults["params_file"])), ns),
            example("example_perception", ns),
            example("example_behaviour_layer", ns, {"stuck_period_s": period}),
            example("example_ask_delivery", ns, {"answer": answer})]


# --- as processes (demo, benchmarks, tests) -----------------------------------------------
def ros_arguments(params: Optional[str] = None, namespace: str = "",
                  remaps: Sequence[tuple[str, str]] = REMAPS,
                  overrides: Optional[Mapping[str, object]] = None) -> list[str]:
    return decider(params, namespace, remaps, overrides).ros_arguments()


def command(**kwargs) -> list[str]:
    return decider(**kwargs).command()


def start(stdout=None, stderr=None, env: Optional[Mapping[str, str]] = None,
          spec: Optional[NodeSpec] = None, **kwargs) -> subprocess.Popen:
    """Start a node (the decider unless `spec` says otherwise) as its own process.

    It inherits ROS_DOMAIN_ID and ROS_AUTOMATIC_DISCOVERY_RANGE from `env` (default: this process),
    and the robot's middleware profile as `profile_environment` says.
    """
    spec = spec or decider(**kwargs)
    base = dict(env if env is not None else os.environ)
    return subprocess.Popen(spec.command(), stdout=stdout, stderr=stderr,
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
