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
