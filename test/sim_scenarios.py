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

"""Small simulated scenarios for the simulator's tests: a base document with changes."""
from __future__ import annotations

import copy
from typing import Mapping

from helpaware_node.sim.scenario import parse, Scenario


def scenario_from(base: Mapping, **changes) -> Scenario:
    """Return `base` with each change applied at its path, parsed as a scenario file would be.

    `base` with each change applied at its path (`people__regulars=3` sets
    base["people"]["regulars"]), parsed as a scenario file would be.
    """
    data = copy.deepcopy(dict(base))
    for path, value in changes.items():
        node = data
        keys = path.split("__")
        for k in keys[:-1]:
            node = node[k]
        node[keys[-1]] = value
    return parse(data)
