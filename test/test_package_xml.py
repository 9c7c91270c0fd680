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

"""package.xml declares what the code imports, no more and no less.

Requirements.txt installs the same things into the venv.

Imports are read with `ast` from every module of the package and the launch files (run-time
dependencies) and from the tests (test dependencies). A ROS package's Python module has the
package's name; other modules map to rosdep keys here. The keys python3-numpy, -scipy, -yaml,
-matplotlib, -pytest, -hypothesis and -jsonschema are in ros/rosdistro rosdep/python.yaml;
rosbags, lz4 and backports.zstd are not there, so rosdep/helpaware_node.yaml defines them.
"""
import ast
import os
import re
import sys
import xml.etree.ElementTree as ET

import yaml

ROOT = os.path.join(os.path.dirname(__file__), "..")
PACKAGE = "helpaware_node"
# module -> (rosdep key, pip requirement)
PYTHON_MODULES = {
    "numpy": ("python3-numpy", "numpy"),
    "scipy": ("python3-scipy", "scipy"),
    "yaml": ("python3-yaml", "pyyaml"),
    "matplotlib": ("python3-matplotlib", "matplotlib"),
    "rosbags": ("python3-rosbags-pip", "rosbags"),
    "lz4": ("python3-lz4", "rosbags"),                        # a dependency of rosbags
    "backports": ("python3-backports-zstd-pip", "rosbags"),   # backports.zstd, the same
    "pytest": ("python3-pytest", "pytest"),
    "hypothesis": ("python3-hypothesis", "hypothesis"),
    "jsonschema": ("python3-jsonschema", "jsonschema"),
    "flake8": ("python3-flake8", "flake8"),
}
# imported where present, else the code takes another path (and says so)
OPTIONAL = {"compression": "Python 3.14's zstd; backports.zstd before",
            "sklearn": "a cross-check in test_review_metrics (importorskip)",
            "statsmodels": "bench/ only",
            "orjson": "the faster JSON writer (pip extra 'fast'); the standard library otherwise"}
# pip names of the ROS wheels in requirements.txt (ros-<package with dashes>)
ROS_WHEEL = "ros-{}"
# ROS packages in the venv that come with rclpy's wheels rather than a line of their own
WHEELS_WITH_RCLPY = {"rcl_interfaces", "rosgraph_msgs", "ament_index_python"}
# ROS packages the venv gets from ../shared/vendor/ros-launch (make test), not from PyPI
VENDORED = {"launch", "launch_ros", "launch_testing", "launch_testing_ros"}
# ROS packages with no wheel on PyPI: a ROS install has them, the venv not (the test skips)
NOT_ON_PYPI = {"ament_copyright": "test_copyright.py"}


def python_files(*folders):
    for folder in folders:
        for base, dirs, files in os.walk(os.path.join(ROOT, folder)):
            dirs[:] = [d for d in dirs if d != "__pycache__"]
            for f in files:
                if f.endswith(".py"):
                    yield os.path.join(base, f)


def top_level_imports(paths):
    found = {}
    for path in paths:
        with open(path, encoding="utf-8") as fh:
            tree = ast.parse(fh.read(), path)
        for node in ast.walk(tree):
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            else:
                continue
            for n in names:
                found.setdefault(n.split(".")[0], set()).add(os.path.relpath(path, ROOT))
    return found


def third_party(imports):
    local = {PACKAGE} | {os.path.splitext(os.path.basename(p))[0] for p in python_files("test")}
    return {m: where for m, where in imports.items()
            if m not in sys.stdlib_module_names and m not in local and m not in OPTIONAL}


def key_for(module):
    return PYTHON_MODULES[module][0] if module in PYTHON_MODULES else module


def declared():
    root = ET.parse(os.path.join(ROOT, "package.xml")).getroot()
    deps = {}
    for tag in ("depend", "exec_depend", "test_depend", "build_depend"):
        deps[tag] = {e.text.strip() for e in root.findall(tag)}
    return deps


def runtime_modules():
    return third_party(top_level_imports(python_files(PACKAGE, "launch")))


def modules_of_tests():
    runtime = set(runtime_modules())
    return {m: w for m, w in third_party(top_level_imports(python_files("test"))).items()
            if m not in runtime}


def test_every_import_has_its_key():
    deps = declared()
    run_keys = deps["exec_depend"] | deps["depend"]
    test_keys = deps["test_depend"] | run_keys
    for module, where in runtime_modules().items():
        assert module in PYTHON_MODULES or module.replace("_", "").isalnum(), module
        assert key_for(module) in run_keys, f"{module} (imported in {sorted(where)[:3]}) " \
            "needs an exec_depend in package.xml"
    for module, where in modules_of_tests().items():
        assert key_for(module) in test_keys, f"{module} (imported in {sorted(where)[:3]}) " \
            "needs a test_depend in package.xml"


def test_no_key_without_an_import():
    deps = declared()
    run = {key_for(m) for m in runtime_modules()}
    tests = {key_for(m) for m in modules_of_tests()}
    assert deps["exec_depend"] - run == set()
    assert deps["test_depend"] - tests == set()
    assert deps["depend"] == set() and deps["build_depend"] == set()


def test_the_keys_rosdep_lacks_are_in_our_rosdep_file():
    with open(os.path.join(ROOT, "rosdep", "helpaware_node.yaml")) as fh:
        ours = yaml.safe_load(fh)
    for key in ("python3-rosbags-pip", "python3-lz4", "python3-backports-zstd-pip"):
        assert key in declared()["exec_depend"] and key in ours, key
        assert {"debian", "ubuntu"} <= set(ours[key]), key
    # a -pip key installs the pip package of that name
    assert ours["python3-rosbags-pip"]["ubuntu"]["pip"]["packages"] == ["rosbags"]
    assert ours["python3-backports-zstd-pip"]["ubuntu"]["pip"]["packages"] == ["backports.zstd"]


def requirements():
    with open(os.path.join(ROOT, "requirements.txt")) as fh:
        lines = [re.split(r"[<>=#\s]", x.strip())[0] for x in fh if x.strip()
                 and not x.startswith("#")]
    return {x.lower() for x in lines if x}


def test_requirements_install_what_package_xml_declares():
    reqs = requirements()
    for module in set(runtime_modules()) | set(modules_of_tests()):
        if module in PYTHON_MODULES:
            assert PYTHON_MODULES[module][1] in reqs, module
        elif module in VENDORED or module in WHEELS_WITH_RCLPY:
            continue
        elif module in NOT_ON_PYPI:
            assert ROS_WHEEL.format(module.replace("_", "-")) not in reqs, module
        else:   # a ROS package with a wheel of its own
            assert ROS_WHEEL.format(module.replace("_", "-")) in reqs, module
