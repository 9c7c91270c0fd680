"""ament_copyright on the file headers, where it is installed.

It is not on PyPI (no ros-ament-copyright wheel), so the venv of `make test` does not have it;
a ROS 2 install has it as ros-<distro>-ament-copyright. Without it the test skips and says so.
"""
from lint_paths import SOURCE_PATHS
import pytest

try:
    from ament_copyright.main import main
except ImportError:
    main = None


@pytest.mark.copyright
@pytest.mark.linter
@pytest.mark.skipif(main is None, reason="ament_copyright is not installed: it has no wheel on "
                    "PyPI (requirements.txt cannot list it); a ROS 2 install provides it")
def test_copyright():
    rc = main(argv=SOURCE_PATHS)
    assert rc == 0, "Found errors"
