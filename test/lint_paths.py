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

"""What the linter tests check: every Python source of the repository, and the settings file.

The paths are absolute, so the tests give one answer whether pytest runs from the repository
(`make test`) or from a copy of the source (`colcon test`).
"""
import os

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
SETUP_CFG = os.path.join(ROOT, "setup.cfg")
SOURCE_PATHS = [p for p in (os.path.join(ROOT, name) for name in (
    "helpaware_node", "test", "bench", "launch", "tools", "setup.py")) if os.path.exists(p)]
