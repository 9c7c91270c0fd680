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

"""The fitted constants as the node's ROS 2 parameter file (YAML keyed by node name)."""
from __future__ import annotations

from typing import Iterable, Mapping

from ..core.model import SiteModel
from ..yamlfile import load_yaml_file

FITTED_NAMES = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability")
# written too when given (estimated from ask times, or learned online)
OPTIONAL_NAMES = ("ask_memory_half_life_s",)
DEFAULT_NODE_NAME = "helpaware_decider"   # ros/node.py NODE_NAME (tested)


def _float_text(v: float) -> str:
    text = repr(float(v))          # repr keeps a decimal point: 1.0, not 1
    return text if any(ch in text for ch in ".en") else text + ".0"


def render_param_file(values: Mapping[str, float], comments: Iterable[str],
                      node_name: str = DEFAULT_NODE_NAME) -> str:
    names = list(FITTED_NAMES) + [k for k in OPTIONAL_NAMES if values.get(k) is not None]
    SiteModel(**{k: float(values[k]) for k in names})   # refuse out-of-range values
    lines = [f"# {c}" if c else "#" for c in comments]
    lines += [f"{node_key(node_name)}:", "  ros__parameters:"]
    for k in names:
        lines.append(f"    {k}: {_float_text(values[k])}")
    return "\n".join(lines) + "\n"


def node_key(node_name: str) -> str:
    """`/**/name` (this node name in any namespace), as config/default.yaml does.

    a name that already starts with '/' is used as given.
    """
    return node_name if node_name.startswith("/") else f"/**/{node_name}"


def read_param_file(path: str, node_name: str = DEFAULT_NODE_NAME) -> dict:
    """Return the parameters of `node_name` in a file written by `write_param_file`."""
    doc = load_yaml_file(path, ValueError, "parameter file")
    try:
        return dict(doc[node_key(node_name)]["ros__parameters"])
    except (KeyError, TypeError):
        raise ValueError(f"parameter file {path}: no '{node_key(node_name)}: ros__parameters' "
                         f"section") from None
