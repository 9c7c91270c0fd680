"""ament_flake8 on every Python source, as the ament_python template's test does.

The settings are setup.cfg's [flake8] (line length 99 as ament's own, excluded paths), kept in
step with ruff.toml.
"""
import pytest
from ament_flake8.main import main_with_errors

from lint_paths import SETUP_CFG, SOURCE_PATHS


@pytest.mark.flake8
@pytest.mark.linter
def test_flake8():
    rc, errors = main_with_errors(argv=["--config", SETUP_CFG] + SOURCE_PATHS)
    assert rc == 0, "Found %d code style errors / warnings:\n" % len(errors) + "\n".join(errors)
