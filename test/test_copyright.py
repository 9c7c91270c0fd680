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

"""ament_copyright on the file headers, where it is installed.

It is not on PyPI (no ros-ament-copyright wheel), so the venv of `make test` does not have it;
a ROS 2 install has it as ros-<distro>-ament-copyright. Without it the test skips and says so;
test_license_headers.py checks here that every source file carries the Apache-2.0 header
(`Copyright <year> <holder>` and the notice of LICENSE's appendix) that ament_copyright looks
for.
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
