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

"""Session fixtures: the package built with colcon once per run, and an ament install.

See installs.py for what they build and why.
"""
import os

from installs import colcon_command, copy_source, hand_built_prefix, Install, PACKAGE, run_colcon
import pytest


@pytest.fixture(scope="session")
def colcon_builds(tmp_path_factory) -> dict:
    if colcon_command() is None:
        pytest.skip("colcon is not installed here (requirements.txt lists colcon-core, "
                    "colcon-ros, colcon-package-selection, colcon-bash; `make test` installs "
                    "them): the colcon build is not tested")
    workspace = str(tmp_path_factory.mktemp("colcon_ws"))
    copy_source(os.path.join(workspace, "src", PACKAGE))
    return {variant: run_colcon(workspace, variant) for variant in ("plain", "symlink")}


@pytest.fixture(scope="session")
def ament_install(request, tmp_path_factory) -> Install:
    if colcon_command() is not None:
        plain = request.getfixturevalue("colcon_builds")["plain"]
        if plain.install is not None:
            return plain.install
    return hand_built_prefix(str(tmp_path_factory.mktemp("ament_prefix") / "install"))
