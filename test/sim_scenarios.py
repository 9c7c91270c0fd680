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
