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

"""Where the package's data and executables are: config/, scenarios/, schemas/, launch/, lib/.

A ROS 2 install (colcon) puts them under the package prefix, which the ament index names
(share/helpaware_node/<kind>, lib/helpaware_node/<executable>); `pip install` puts the same
layout under sys.prefix; a source checkout has them beside the code. They are looked up in
that order, so a sourced workspace wins over a venv and a venv over the source tree.
No rclpy here: ament_index_python is a plain Python package.
"""
from __future__ import annotations

import os
import sys
from typing import Optional

PACKAGE = "helpaware_node"
SOURCE_ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
# kind -> folder in a source checkout; installed, each is share/<package>/<kind>
SOURCE_DIRS = {"config": "config", "scenarios": "scenarios",
               "schemas": os.path.join("docs", "schemas"), "launch": "launch"}


def ament_prefix() -> Optional[str]:
    """Return the package's prefix in the ament index (AMENT_PREFIX_PATH), or None outside one."""
    if not os.environ.get("AMENT_PREFIX_PATH"):
        return None
    try:
        from ament_index_python.packages import get_package_prefix
        return get_package_prefix(PACKAGE)
    except (ImportError, LookupError, OSError, ValueError):
        return None   # no ament_index_python, or an index without this package


def install_prefixes() -> list[str]:
    """Prefixes that may hold an install of the package, most specific first."""
    found = [ament_prefix(), sys.prefix]
    return [p for i, p in enumerate(found) if p and p not in found[:i]]


def data_dir(kind: str) -> str:
    """share/<package>/<kind> of the first install that has it, else the source tree's folder."""
    for prefix in install_prefixes():
        installed = os.path.join(prefix, "share", PACKAGE, kind)
        if os.path.isdir(installed):
            return installed
    return os.path.join(SOURCE_ROOT, SOURCE_DIRS[kind])


def data_file(kind: str, name: str) -> str:
    """Return the path of a file the user named.

    A path that exists, or any name with a folder in it, is taken as given; a bare name
    (`hospital_night.yaml`, or `hospital_night`) is looked up in data_dir(kind).
    """
    if os.path.exists(name) or os.sep in name or (os.altsep and os.altsep in name):
        return os.path.abspath(name)
    folder = data_dir(kind)
    if not os.path.splitext(name)[1] and not os.path.exists(os.path.join(folder, name)):
        name += ".json" if kind == "schemas" else ".yaml"
    return os.path.join(folder, name)


def available(kind: str) -> list[str]:
    """File names in data_dir(kind), for messages that list what can be named."""
    folder = data_dir(kind)
    return sorted(os.listdir(folder)) if os.path.isdir(folder) else []


def executable(name: str) -> Optional[str]:
    """Return the path of an installed executable, or None.

    lib/<package>/<name> (the ament_python layout `ros2 run` uses) in the first install that has
    it, else the console script beside this Python (a venv's bin/); None if neither.
    """
    candidates = [os.path.join(p, "lib", PACKAGE, name) for p in install_prefixes()]
    candidates.append(os.path.join(os.path.dirname(sys.executable), name))
    for path in candidates:
        if os.path.isfile(path) and os.access(path, os.X_OK):
            return path
    return None
