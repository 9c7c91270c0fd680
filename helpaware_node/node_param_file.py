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

"""Read a node parameter file (ROS 2 YAML) into SiteModel and DecisionConfig, without rclpy.

The file has the usual form `<node name or /**/name>: {ros__parameters: {...}}`.  Nested
groups are flattened with '.'; names are the node's (`k_busy`, `continue_cost_s.door`, ...).
Values not given keep the `base` values (the recorded parameters), so a file may hold only the
values to change.  The conversion is the node's own (`helpaware_node.ros.params.build`).
Parameters that are not decision settings (topics, store, ...) are listed in `ignored` so the
report can show them.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping, Optional

from .core.model import CoreInputError, DecisionConfig, SiteModel, to_plain
from .yamlfile import load_yaml_file


class ParamFileError(ValueError):
    """A parameter file that cannot be used; names the file and the parameter."""


@dataclass
class LoadedParams:
    model: SiteModel
    config: DecisionConfig
    path: str
    applied: dict = field(default_factory=dict)
    ignored: list = field(default_factory=list)
    pending_ask_timeout_s: Optional[float] = None
    rules: Any = None               # session.SessionRules from the node settings in the file


def _find_parameters(doc: Any, path: str) -> dict:
    """Return the first `ros__parameters` mapping in the file (depth-first, file order)."""
    if isinstance(doc, Mapping):
        if "ros__parameters" in doc:
            params = doc["ros__parameters"]
            if not isinstance(params, Mapping):
                raise ParamFileError(f"{path}: ros__parameters must be a mapping")
            return dict(params)
        for value in doc.values():
            found = _find_parameters(value, path)
            if found:
                return found
    return {}


def _flatten(params: Mapping, prefix: str = "") -> dict:
    out = {}
    for k, v in params.items():
        name = f"{prefix}{k}"
        if isinstance(v, Mapping):
            out.update(_flatten(v, name + "."))
        else:
            out[name] = v
    return out


def parameters_from_yaml(path: str) -> dict:
    doc = load_yaml_file(path, ParamFileError, "parameter file")
    params = _find_parameters(doc, path)
    if not params:
        raise ParamFileError(f"{path}: no 'ros__parameters' section found")
    return _flatten(params)


def apply_parameters(flat: Mapping[str, Any], base_model: SiteModel, base_config: DecisionConfig,
                     path: str = "<parameters>") -> LoadedParams:
    """Overlay the file's values on the base values, built by the node's own conversion.

    Overlay the file's values on the base values and build them with the node's own conversion
    (`ros.params.build`, importable without rclpy), so ranges and cross-checks are exactly the
    node's.
    """
    from .ros import params as node_params
    values = node_params.defaults(list(base_config.continue_costs_s))
    base = {**to_plain(base_model), **to_plain(base_config)}
    for k, v in base.items():
        if k == "continue_costs_s":
            for kind, cost in v.items():
                values[node_params.COST_PREFIX + kind] = cost
        elif k in values:
            values[k] = v
    applied, ignored = {}, []
    for name, value in flat.items():
        if name in values or name.startswith(node_params.COST_PREFIX):
            values[name] = value
            applied[name] = value
        else:
            ignored.append(name)
    try:
        model, config, settings = node_params.build(values)
    except (CoreInputError, TypeError, KeyError) as exc:
        raise ParamFileError(f"{path}: {exc}") from None
    loaded = LoadedParams(model, config, path, applied, sorted(ignored))
    loaded.pending_ask_timeout_s = settings.pending_ask_timeout_s
    loaded.rules = settings.session_rules()
    return loaded


def load_params(path: str, base_model: Optional[SiteModel] = None,
                base_config: Optional[DecisionConfig] = None) -> LoadedParams:
    return apply_parameters(parameters_from_yaml(path), base_model or SiteModel(),
                            base_config or DecisionConfig(), path)
