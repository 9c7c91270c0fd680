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

"""ament_flake8 on every Python source, as the ament_python template's test does.

The settings are setup.cfg's [flake8] (line length 99 as ament's own, excluded paths, the
plugins' options), kept in step with ruff.toml. The flake8 plugins ament_flake8's package.xml
names (import order, quotes, builtins, comprehensions, docstrings, class newline, ...) are
pinned in requirements.txt, so this test checks here what `colcon test` checks on a ROS install;
test_ament_flake8_plugins_loaded keeps it that way.
"""
import configparser
import os
import re
import sys
import tomllib
import xml.etree.ElementTree as ET

import ament_flake8
from ament_flake8.main import main_with_errors
from flake8.plugins import finder
from lint_paths import ROOT, SETUP_CFG, SOURCE_PATHS
import pytest


@pytest.mark.flake8
@pytest.mark.linter
def test_flake8():
    rc, errors = main_with_errors(argv=["--config", SETUP_CFG] + SOURCE_PATHS)
    assert rc == 0, "Found %d code style errors / warnings:\n" % len(errors) + "\n".join(errors)


def _distribution_key(name: str) -> str:
    """Name a distribution as PyPI compares names (PEP 503): _ and - alike, any case."""
    return re.sub(r"[-_.]+", "-", name).lower()


def _ament_flake8_package_xml() -> str:
    """Find ament_flake8's package.xml: <prefix>/share/ament_flake8, beside its lib/pythonX/..."""
    try:  # a sourced ROS install (AMENT_PREFIX_PATH set)
        from ament_index_python.packages import get_package_share_directory
        share = get_package_share_directory("ament_flake8")
    except (ImportError, LookupError, OSError):  # the wheels in .venv: no AMENT_PREFIX_PATH
        # <prefix>/lib/python3.X/site-packages/ament_flake8 -> <prefix>/share/ament_flake8
        module_dir = os.path.dirname(ament_flake8.__file__)
        share = os.path.join(module_dir, *[os.pardir] * 4, "share", "ament_flake8")
    return os.path.normpath(os.path.join(share, "package.xml"))


@pytest.mark.linter
def test_ament_flake8_plugins_loaded():
    """Check that every flake8 plugin ament_flake8 exec_depends on is one flake8 loads here.

    Without one, test_flake8 silently stops checking what that plugin checks on a ROS install
    (as when the PyPI wheels, which name no dependencies, were all this venv had).
    """
    package_xml = _ament_flake8_package_xml()
    assert os.path.isfile(package_xml), f"no package.xml of ament_flake8 at {package_xml}"
    depends = [e.text.strip() for e in ET.parse(package_xml).getroot().iter("exec_depend")]
    # rosdep keys python3-<name> are the PyPI distributions <name>; python3-flake8 is flake8 itself
    wanted = {_distribution_key(d.removeprefix("python3-")) for d in depends
              if d.startswith("python3-flake8-")}
    assert len(wanted) >= 8, f"expected ament's eight flake8 plugins in {package_xml}: {depends}"
    # flake8's own finder, as `flake8 --version` lists them; loading imports each plugin
    plugins = finder.load_plugins(
        finder.find_plugins(configparser.RawConfigParser(), finder.PluginOptions.blank()),
        finder.PluginOptions.blank())
    loaded = {_distribution_key(p.plugin.package) for p in plugins.all_plugins()}
    missing = sorted(wanted - loaded)
    assert not missing, (
        f"flake8 plugins ament_flake8 needs ({package_xml}) are not installed for "
        f"{sys.executable}: {missing}; pin them in requirements.txt "
        f"(flake8 loads: {sorted(loaded)})")


@pytest.mark.linter
def test_ruff_and_flake8_settings_agree():
    """Check that ruff.toml and setup.cfg's [flake8] give one line length and one excluded set."""
    flake8 = configparser.ConfigParser()
    flake8.read(SETUP_CFG)
    with open(os.path.join(ROOT, "ruff.toml"), "rb") as fh:
        ruff = tomllib.load(fh)
    assert ruff["line-length"] == flake8.getint("flake8", "max-line-length") == 99
    excluded = {p.strip() for p in flake8.get("flake8", "exclude").split(",")}
    # ruff already leaves out .git, .venv and __pycache__ (its default exclude list)
    assert set(ruff["extend-exclude"]) | {".git", ".venv", "__pycache__"} == excluded
    # ruff's rule families: flake8's own checkers, pycodestyle (E, W) and pyflakes (F), and isort
    # (I), configured so `ruff check --fix` orders imports as flake8-import-order's google style
    assert set(ruff["lint"]["select"]) == {"E", "W", "F", "I"}
    assert flake8.get("flake8", "import-order-style") == "google"
