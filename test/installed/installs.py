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

"""Installs of the package for the tests here (the fixtures are in conftest.py).

`colcon_builds`: colcon (colcon-core, colcon-ros, colcon-package-selection, colcon-bash from
requirements.txt) builds a copy of the source in a temporary workspace, plain and with
`--symlink-install`. `ament_install`: an install to run against an ament index, for the
installed-node and launch tests: the plain colcon install, or, where colcon is missing or its
build failed, a prefix built here with the package's marker, package.xml, data and executables.
The venv's own `pip install -e` is never made an ament prefix. Every environment handed to a
process keeps this run's ROS_DOMAIN_ID and ROS_AUTOMATIC_DISCOVERY_RANGE (test/conftest.py).
"""
from __future__ import annotations

from dataclasses import dataclass, field
import importlib.metadata
import json
import os
import shutil
import subprocess
import sys
from typing import Optional

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PACKAGE = "helpaware_node"
VENDOR_LAUNCH = os.path.normpath(os.path.join(ROOT, "..", "shared", "vendor", "ros-launch"))
# what a clone holds that the build reads (setup.py data_files, package.xml, the code)
SOURCE_ENTRIES = ("setup.py", "setup.cfg", "package.xml", "README.md", "LICENSE", "resource",
                  PACKAGE, "launch", "config", "scenarios", "docs", "rosdep")
DDS_KEYS = ("ROS_DOMAIN_ID", "ROS_AUTOMATIC_DISCOVERY_RANGE")
BUILD_TIMEOUT_S = 600


@dataclass
class Install:
    kind: str                  # "colcon", "colcon --symlink-install" or "hand-built prefix"
    workspace: str
    prefix: str                # the package's prefix (install/helpaware_node)
    env_delta: dict = field(default_factory=dict)   # what sourcing the install changes

    def env(self) -> dict:
        """Return this process's environment (ROS_HOME, domain, discovery range) + the install."""
        env = dict(os.environ)
        env.update(self.env_delta)
        missing = [k for k in DDS_KEYS if not env.get(k)]
        assert not missing, f"{missing} unset: every rclpy process needs them (DESIGN.md)"
        return env

    def executable(self, name: str) -> str:
        return os.path.join(self.prefix, "lib", PACKAGE, name)

    def share(self, *parts: str) -> str:
        return os.path.join(self.prefix, "share", PACKAGE, *parts)


@dataclass
class ColconBuild:
    variant: str
    command: list
    returncode: int
    stdout: str
    stderr: str
    install: Optional[Install]


def colcon_command() -> Optional[str]:
    beside = os.path.join(os.path.dirname(sys.executable), "colcon")
    return beside if os.access(beside, os.X_OK) else shutil.which("colcon")


def copy_source(dst: str) -> None:
    os.makedirs(dst)
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info")
    for entry in SOURCE_ENTRIES:
        src = os.path.join(ROOT, entry)
        if os.path.isdir(src):
            shutil.copytree(src, os.path.join(dst, entry), ignore=ignore)
        elif os.path.exists(src):
            shutil.copy2(src, os.path.join(dst, entry))


def build_environment() -> dict:
    env = dict(os.environ)
    # the Makefile's PYTHONDONTWRITEBYTECODE makes distutils print "byte-compiling is disabled";
    # a user's build compiles, so this one does too (into the temporary install only)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def sourced_delta(setup_script: str, cwd: str) -> dict:
    """Return what `source install/setup.bash` changes in the environment."""
    base = build_environment()
    dump = f"{sys.executable} -c 'import json, os; print(json.dumps(dict(os.environ)))'"
    out = subprocess.run(["bash", "-c", f"source {setup_script} >/dev/null 2>&1 && {dump}"],
                         cwd=cwd, env=base, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr[-2000:]
    after = json.loads(out.stdout.strip().splitlines()[-1])
    delta = {k: v for k, v in after.items() if base.get(k) != v}
    for key in DDS_KEYS + ("ROS_HOME",):   # never taken from the setup script
        delta.pop(key, None)
    return delta


def run_colcon(workspace: str, variant: str) -> ColconBuild:
    install_base = os.path.join(workspace, f"install_{variant}")
    cmd = [colcon_command(), "--log-base", os.path.join(workspace, f"log_{variant}"), "build",
           "--base-paths", "src", "--packages-select", PACKAGE,
           "--build-base", os.path.join(workspace, f"build_{variant}"),
           "--install-base", install_base]
    if variant == "symlink":
        cmd.append("--symlink-install")
    proc = subprocess.run(cmd, cwd=workspace, env=build_environment(), capture_output=True,
                          text=True, timeout=BUILD_TIMEOUT_S)
    install = None
    setup = os.path.join(install_base, "setup.bash")
    if proc.returncode == 0 and os.path.exists(setup):
        kind = "colcon --symlink-install" if variant == "symlink" else "colcon"
        install = Install(kind, workspace, os.path.join(install_base, PACKAGE),
                          sourced_delta(setup, workspace))
    return ColconBuild(variant, cmd, proc.returncode, proc.stdout, proc.stderr, install)


def hand_built_prefix(prefix: str) -> Install:
    """Return an ament prefix with what launch_ros and package_data look for.

    Running the venv's code.
    """
    index = os.path.join(prefix, "share", "ament_index", "resource_index", "packages")
    os.makedirs(index)
    open(os.path.join(index, PACKAGE), "w").close()
    share = os.path.join(prefix, "share", PACKAGE)
    os.makedirs(share)
    shutil.copy2(os.path.join(ROOT, "package.xml"), share)
    for kind, src in (("launch", "launch"), ("config", "config"), ("scenarios", "scenarios"),
                      ("schemas", os.path.join("docs", "schemas"))):
        shutil.copytree(os.path.join(ROOT, src), os.path.join(share, kind))
    lib = os.path.join(prefix, "lib", PACKAGE)
    os.makedirs(lib)
    scripts = [e for e in importlib.metadata.distribution(PACKAGE).entry_points
               if e.group == "console_scripts"]
    for entry in scripts:
        module, attr = entry.value.split(":")
        path = os.path.join(lib, entry.name)
        with open(path, "w") as fh:
            fh.write(f"#!{sys.executable}\nimport sys\nfrom {module} import {attr}\n"
                     f"sys.exit({attr}())\n")
        os.chmod(path, 0o755)
    ament = os.pathsep.join(p for p in (prefix, os.environ.get("AMENT_PREFIX_PATH")) if p)
    return Install("hand-built prefix", prefix, prefix, {"AMENT_PREFIX_PATH": ament})


def launch_testing_missing() -> Optional[str]:
    """Why the launch tests cannot run here, or None when they can."""
    import importlib.util
    have = all(importlib.util.find_spec(m) for m in ("launch", "launch_ros", "launch_testing"))
    if have:
        return None
    if os.path.isdir(VENDOR_LAUNCH):
        return (f"launch_testing is not installed in {sys.prefix}: `make test` installs it from "
                f"{VENDOR_LAUNCH} (or run its install.sh {sys.executable})")
    return (f"no launch, launch_ros and launch_testing here, and no {VENDOR_LAUNCH} to install "
            "them from (make test does so where it exists); on a ROS 2 install, source it to "
            "run these tests")
