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

"""Every node parameter in one table: declaration (descriptor, units, range) <-> core values.

The model (`SiteModel`) and decision (`DecisionConfig`) fields are declared under their own
names; continue costs per request kind as `continue_cost_s.<kind>`; node settings beside them.
A validation callback, registered before any declaration, rebuilds the core values from the
proposed set and refuses it with the core's reason (field and range) so old values stay.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass
import math
from typing import Any, Callable, Optional

from ..core.model import (
    CoreInputError,
    DecisionConfig,
    DEFAULT_CONTINUE_COSTS_S,
    MAX_ASKS_CAP,
    MAX_REASK_INTERVAL_S,
    SiteModel,
)
from ..fit.online import LearningSettings, MODES as LEARNING_MODES
from ..store.ids import check_robot_id

MODEL_DEFAULTS = SiteModel()
LEARNING_DEFAULTS = LearningSettings()
CONFIG_DEFAULTS = DecisionConfig()
KINDS_PARAM = "request_kinds"
COST_PREFIX = "continue_cost_s."


@dataclass(frozen=True)
class ParamSpec:
    name: str
    default: Any
    description: str
    units: str
    low: Optional[float] = None
    high: Optional[float] = None
    read_only: bool = False
    group: str = "node"           # model | config | cost | node

    @property
    def type_name(self) -> str:
        v = self.default
        if isinstance(v, bool):
            return "bool"
        if isinstance(v, int):
            return "integer"
        if isinstance(v, float):
            return "double"
        if isinstance(v, (list, tuple)):
            return "string array"
        return "string"


def _m(name, desc, units, low, high):
    return ParamSpec(name, float(getattr(MODEL_DEFAULTS, name)), desc, units, low, high,
                     group="model")


def _c(name, desc, units, low, high):
    v = getattr(CONFIG_DEFAULTS, name)
    v = v if isinstance(v, int) and not isinstance(v, bool) else float(v)
    return ParamSpec(name, v, desc, units, low, high, group="config")


MODEL_PARAMS = [
    _m("prior_a", "a0 of the Beta prior on willingness", "pseudo-helps", 1e-6, 1e6),
    _m("prior_b", "b0 of the Beta prior on willingness", "pseudo-declines", 1e-6, 1e6),
    _m("k_busy", "weight of busyness in the context factor c", "1 per unit busyness", 0.0, 50.0),
    _m("k_load", "weight of recent asks in the context factor c", "1 per unit ask load", 0.0,
       50.0),
    _m("notice_probability", "chance a person noticed an ask they did not answer", "probability",
       0.0, 1.0),
    _m("ask_memory_half_life_s", "half-life of the ask load", "seconds", 1e-3, 1e9),
    _m("evidence_half_life_s", "half-life of forgetting towards the prior (0 disables)", "seconds",
       0.0, 1e12),
    _m("default_busyness", "busyness used when perception gives none", "fraction [0, 1]", 0.0,
       1.0),
]

CONFIG_PARAMS = [
    _c("help_time_s", "seconds a successful ask takes (t_help)", "seconds", 0.0, 1e9),
    _c("ask_time_s", "seconds lost to a declined ask (t_ask)", "seconds", 0.0, 1e9),
    _c("interruption_weight_s", "interruption cost scale I", "robot-seconds", 0.0, 1e9),
    _c("busy_cost", "extra interruption per unit busyness", "factor", 0.0, 1e9),
    _c("repeat_cost", "extra interruption per unit ask load", "factor", 0.0, 1e9),
    _c("urgency_cost_gain", "C_r = base * (1 + gain * urgency)", "factor", 0.0, 1e9),
    _c("default_continue_cost_s", "continue cost of a kind without its own", "robot-seconds", 0.0,
       1e9),
    _c("typical_busyness", "busyness of a typical future request (information value)",
       "fraction [0, 1]", 0.0, 1.0),
    _c("typical_continue_cost_s", "continue cost of a typical future request", "robot-seconds",
       0.0, 1e9),
    _c("lookahead_horizon_s", "future requests counted up to this far ahead", "seconds", 0.0, 1e9),
    _c("future_discount_time_s", "exponential discount time of later requests", "seconds", 1e-3,
       1e12),
    _c("prior_candidate_rate_per_day", "prior mean rate at which a never-seen person is a "
       "candidate again (most are never seen again)", "per day", 0.0, 1e9),
    _c("prior_rate_window_s", "weight of that prior rate", "seconds", 1e-3, 1e12),
    _c("min_reask_interval_s", "minimum interval before asking the same person again "
       "(at most 30 days)", "seconds", 0.0, MAX_REASK_INTERVAL_S),
    _c("max_asks_per_person_per_day", "most asks of one person in 24 h", "asks per day", 0,
       MAX_ASKS_CAP),
    _c("max_asks_per_hour", "most asks by this robot in one hour", "asks per hour", 0,
       MAX_ASKS_CAP),
    _c("busyness_limit", "never ask at or above this busyness", "fraction [0, 1]", 0.0, 1.0),
    _c("max_distance_m", "never ask someone farther away", "metres", 0.0, 1e6),
    _c("max_observation_age_s", "never ask on an observation older than this", "seconds", 0.0,
       1e9),
    ParamSpec("protected_activities", list(CONFIG_DEFAULTS.protected_activities),
              "activity labels whose people are never asked", "labels", group="config"),
]

NODE_PARAMS = [
    ParamSpec("robot_id", "", "robot id in event ids (empty: HELPAWARE_ROBOT_ID or host name)",
              "text", read_only=True),
    ParamSpec("store_path", "",
              "belief store file (empty: ROS_HOME or ~/.ros, then helpaware/beliefs.sqlite3; "
              "'memory': kept in this process only, lost at exit)", "path",
              read_only=True),
    ParamSpec("navigation_status_topic", "",
              "action_msgs/GoalStatusArray topic; an aborted goal opens a navigation_failure need "
              "(empty: not subscribed)", "topic name", read_only=True),
    ParamSpec(KINDS_PARAM, list(DEFAULT_CONTINUE_COSTS_S),
              "request kinds with their own continue_cost_s.<kind> parameter", "labels",
              read_only=True),
    ParamSpec("autostart", True, "managed mode: configure and activate by itself at start-up",
              "flag", read_only=True),
    ParamSpec("pending_ask_timeout_s", 120.0,
              "an ask without outcome expires after this (no belief change)",
              "seconds", 1.0, 86400.0),
    ParamSpec("max_asks_per_need", 2, "asks at one help need before the robot carries on alone",
              "asks", 1, 100),
    ParamSpec("diagnostics_period_s", 1.0, "period of /diagnostics and markers", "seconds", 0.1,
              60.0,
              read_only=True),
    ParamSpec("asking_enabled", True, "operator switch: false means always continue", "flag"),
    ParamSpec("count_peer_asks", True,
              "fleet peers' asks count here for the re-ask interval, the per-person daily cap and "
              "the ask load (a site-wide re-ask interval); the hourly cap counts this robot's "
              "own asks only", "flag"),
    # site-wide topics (absolute by default, so robots in their own namespaces share them)
    ParamSpec("fleet_topic", "/helpaware/fleet",
              "signed fleet documents shared by every robot of the site (outcomes, asks, "
              "forgets, opt-outs)", "topic name", read_only=True),
    ParamSpec("privacy_topic", "/helpaware/privacy_request",
              "signed opt-out and forget requests from `helpaware privacy`", "topic name",
              read_only=True),
    ParamSpec("allow_unsigned_privacy_requests", False,
              "take unsigned opt-out/forget requests on privacy_topic (a lab setup only: anyone "
              "on the ROS graph could then send them)", "flag", read_only=True),
    # input watchdog (helpaware_node/input_watch.py, docs/integration.md "Respawn")
    ParamSpec("people_silence_warn_s", 10.0,
              "/diagnostics WARN, and one log line, when no people message arrived for longer "
              "than this (0: no warning)", "seconds", 0.0, 86400.0),
    ParamSpec("task_status_silence_warn_s", 0.0,
              "the same for task_status; 0 by default because a behaviour layer speaks only at "
              "help needs: set it when yours publishes at least this often", "seconds",
              0.0, 86400.0),
    # site learning (helpaware_node/fit/online.py, docs/fit.md "Site learning")
    ParamSpec("site_learning", LEARNING_DEFAULTS.mode,
              "refit the site constants (prior_a, prior_b, k_busy, k_load, notice_probability, "
              "ask_memory_half_life_s) from the store's outcomes while running: apply (put them "
              "in force), propose (write site_learning_proposal_path for review only) or off "
              "(never refit; the parameter values stay in force)", "off, propose or apply"),
    ParamSpec("site_prior_weight", LEARNING_DEFAULTS.prior_weight,
              "the parameter values count as this many outcomes against the store's: a few "
              "outcomes cannot swing the learned constants (0: the store's outcomes alone, "
              "as helpaware fit)", "pseudo-outcomes", 0.0, 1e9),
    ParamSpec("site_learning_every_outcomes", LEARNING_DEFAULTS.every_outcomes,
              "refit after this many new outcomes (own and peers') ...", "outcomes", 1, 1000000),
    ParamSpec("site_learning_every_s", LEARNING_DEFAULTS.every_s,
              "... or after this long with at least one new outcome, whichever comes first",
              "seconds", 1.0, 1e9),
    ParamSpec("site_learning_proposal_path", "",
              "parameter file written by site_learning: propose (empty: site_proposal.yaml "
              "beside the store file, or under ROS_HOME/helpaware for a memory store)", "path"),
]


def model_ranges() -> dict[str, tuple[float, float]]:
    """Return the declared range of each model parameter (site learning stays inside them)."""
    return {s.name: (float(s.low), float(s.high)) for s in MODEL_PARAMS}


def cost_specs(kinds) -> list[ParamSpec]:
    return [ParamSpec(COST_PREFIX + k, float(DEFAULT_CONTINUE_COSTS_S.get(
        k, CONFIG_DEFAULTS.default_continue_cost_s)), f"cost of continuing alone at a {k} need",
        "robot-seconds", 0.0, 1e9, group="cost") for k in kinds]


def all_specs(kinds=None) -> list[ParamSpec]:
    kinds = list(DEFAULT_CONTINUE_COSTS_S) if kinds is None else list(kinds)
    return MODEL_PARAMS + CONFIG_PARAMS + cost_specs(kinds) + NODE_PARAMS


@dataclass(frozen=True)
class NodeSettings:
    robot_id: str
    store_path: str
    navigation_status_topic: str
    autostart: bool
    pending_ask_timeout_s: float
    max_asks_per_need: int
    diagnostics_period_s: float
    asking_enabled: bool
    count_peer_asks: bool
    fleet_topic: str
    privacy_topic: str
    allow_unsigned_privacy_requests: bool
    people_silence_warn_s: float
    task_status_silence_warn_s: float
    site_learning: str
    site_prior_weight: float
    site_learning_every_outcomes: int
    site_learning_every_s: float
    site_learning_proposal_path: str

    def learning_settings(self) -> LearningSettings:
        """Site learning's settings from these (fit.online.LearningSettings)."""
        return LearningSettings(mode=self.site_learning, prior_weight=self.site_prior_weight,
                                every_outcomes=self.site_learning_every_outcomes,
                                every_s=self.site_learning_every_s)

    def session_rules(self):
        """Return the help session's rules from these settings (session.SessionRules)."""
        from ..session import SessionRules
        return SessionRules(max_asks_per_need=self.max_asks_per_need,
                            pending_ask_timeout_s=self.pending_ask_timeout_s,
                            asking_enabled=self.asking_enabled,
                            count_peer_asks=self.count_peer_asks)


def build(values: dict[str, Any], pairs: bool = True
          ) -> tuple[SiteModel, DecisionConfig, NodeSettings]:
    """Core values from a full parameter set; raises CoreInputError naming field and range.

    `pairs=False` skips the checks between two parameters (used while declaring one by one,
    when the partner may still hold its default; the full set is checked once declared).
    """
    model = SiteModel(**{s.name: values[s.name] for s in MODEL_PARAMS})
    conf = {s.name: values[s.name] for s in CONFIG_PARAMS}
    conf["protected_activities"] = tuple(conf["protected_activities"])
    conf["continue_costs_s"] = {k[len(COST_PREFIX):]: v for k, v in values.items()
                                if k.startswith(COST_PREFIX)}
    config = DecisionConfig(**conf)
    if pairs and config.typical_busyness >= config.busyness_limit:
        raise CoreInputError(f"typical_busyness ({config.typical_busyness:g}) must be below "
                             f"busyness_limit ({config.busyness_limit:g})")
    if any(not a for a in config.protected_activities):
        raise CoreInputError("protected_activities: labels must be non-empty")
    node_values = {f.name: values[f.name] for f in dataclasses.fields(NodeSettings)}
    if node_values["robot_id"]:     # event ids are "<robot_id>/<sequence>" (store/ids.py)
        check_robot_id(node_values["robot_id"])
    for name in ("fleet_topic", "privacy_topic"):
        if not node_values[name]:
            raise CoreInputError(f"{name}: must not be empty (the default is "
                                 f"{next(s.default for s in NODE_PARAMS if s.name == name)})")
    if node_values["site_learning"] not in LEARNING_MODES:
        raise CoreInputError(f"site_learning: {node_values['site_learning']!r} is not one of "
                             f"{', '.join(LEARNING_MODES)}")
    if node_values["fleet_topic"] == node_values["privacy_topic"]:
        raise CoreInputError(f"privacy_topic: must differ from fleet_topic "
                             f"({node_values['fleet_topic']!r})")
    for s in NODE_PARAMS:
        if s.low is not None and s.high is not None and s.name in node_values:
            v = node_values[s.name]
            if not (isinstance(v, (int, float)) and math.isfinite(v) and s.low <= v <= s.high):
                raise CoreInputError(f"{s.name}: {v!r} is outside the allowed range "
                                     f"[{s.low:g}, {s.high:g}]")
    return model, config, NodeSettings(**node_values)


def defaults(kinds=None) -> dict[str, Any]:
    return {s.name: s.default for s in all_specs(kinds)}


def plain_value(value: Any) -> Any:
    return list(value) if isinstance(value, (list, tuple)) else value


class NodeParameters:
    """Declares every parameter on `node` and keeps the core values in force up to date."""

    def __init__(self, node, on_change: Optional[Callable[[], None]] = None) -> None:
        from rcl_interfaces.msg import (
            FloatingPointRange,
            IntegerRange,
            ParameterDescriptor,
            SetParametersResult,
        )
        self._result = SetParametersResult
        self._on_change = on_change
        self.values: dict[str, Any] = defaults()
        self.rejected = 0
        self.last_rejection = ""
        self._declaring = True
        # registered before any declaration, so file overrides are checked too
        node.add_on_set_parameters_callback(self._check)
        kind_desc = ParameterDescriptor(description=_describe(NODE_PARAMS[3]), read_only=True)
        kinds = node.declare_parameter(KINDS_PARAM, list(DEFAULT_CONTINUE_COSTS_S),
                                       kind_desc).value
        if kinds is None:
            raise CoreInputError(f"{KINDS_PARAM}: {_EMPTY_LIST}")
        kinds = [k for k in kinds if k]
        if len(set(kinds)) != len(kinds):
            twice = sorted({k for k in kinds if kinds.count(k) > 1})
            raise CoreInputError(f"{KINDS_PARAM}: {', '.join(twice)} listed more than once")
        self.values = defaults(kinds)
        self.values[KINDS_PARAM] = list(kinds)
        for spec in all_specs(kinds):
            if spec.name == KINDS_PARAM:
                continue
            desc = ParameterDescriptor(description=_describe(spec), read_only=spec.read_only)
            if spec.low is None or spec.high is None:
                pass   # no range to declare
            elif spec.type_name == "double":
                desc.floating_point_range = [FloatingPointRange(
                    from_value=float(spec.low), to_value=float(spec.high), step=0.0)]
            elif spec.type_name == "integer":
                desc.integer_range = [IntegerRange(from_value=int(spec.low),
                                                   to_value=int(spec.high), step=1)]
            node.declare_parameter(spec.name, spec.default, desc)
        self._declaring = False
        self.model, self.config, self.settings = build(self.values)  # pairs, from the file too
        for name in ("navigation_status_topic", "fleet_topic", "privacy_topic"):
            _check_topic(node, name, getattr(self.settings, name))
        # a misspelt name in a parameter file is ignored by ROS: say so, naming it
        overrides = getattr(node, "_parameter_overrides", {}) or {}
        self.unknown_overrides = sorted(n for n in overrides if not node.has_parameter(n))
        if self.unknown_overrides:
            node.get_logger().warning(
                "parameter file sets parameters this node does not have (ignored): "
                + ", ".join(self.unknown_overrides[:20]))

    def _check(self, params):
        proposed = dict(self.values)
        for p in params:
            if p.value is None and p.name in self.values:
                reason = f"{p.name}: {_EMPTY_LIST}"
                self.rejected += 1
                self.last_rejection = reason
                return self._result(successful=False, reason=reason)
            proposed[p.name] = plain_value(p.value)
        try:
            built = build(proposed, pairs=not self._declaring)
        except (CoreInputError, KeyError, TypeError, ValueError) as exc:
            self.rejected += 1
            self.last_rejection = str(exc)
            return self._result(successful=False, reason=str(exc))
        self.values = proposed
        self.model, self.config, self.settings = built
        if self._on_change is not None:
            self._on_change()
        return self._result(successful=True)


_EMPTY_LIST = ("has no value: an empty list [] carries no type in a ROS 2 parameter file; "
               "leave the parameter out for its default")


def _check_topic(node, name: str, topic: str) -> None:
    """Refuse a topic name rclpy cannot resolve (configure would fail with no message)."""
    if not topic:
        return
    try:
        node.resolve_topic_name(topic)
    except Exception as exc:   # rclpy's InvalidTopicNameException or an RCLError
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise CoreInputError(f"{name}: {topic!r} is not a valid topic name "
                             f"({first[:120]})") from None


def _describe(spec: ParamSpec) -> str:
    rng = f"; range [{spec.low:g}, {spec.high:g}]" if spec.low is not None else ""
    ro = "; read-only (set at start-up)" if spec.read_only else ""
    return f"{spec.description} ({spec.units}{rng}{ro})"


def _fmt_default(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list):
        return "[" + ", ".join(v) + "]"
    return f'"{v}"' if isinstance(v, str) else str(v)


def markdown_table() -> str:
    rows = ["| name | type | default | range | units | live | description |",
            "|---|---|---|---|---|---|---|"]
    for s in all_specs():
        rng = f"[{s.low:g}, {s.high:g}]" if s.low is not None else "-"
        rows.append(f"| `{s.name}` | {s.type_name} | `{_fmt_default(s.default)}` | {rng} | "
                    f"{s.units} | "
                    f"{'no' if s.read_only else 'yes'} | {s.description} |")
    return "\n".join(rows)


def yaml_text(node_name: str, overrides: Optional[dict] = None) -> str:
    """Return a parameter file keyed by the node name.

    Floats always written with a decimal point.
    """
    overrides = overrides or {}
    lines = [f"/**/{node_name}:", "  ros__parameters:"]  # this node name in any namespace
    for s in all_specs():
        v = overrides.get(s.name, s.default)
        if isinstance(v, str):
            text = f'"{v}"'
        elif isinstance(v, list):
            text = "[" + ", ".join(f'"{x}"' for x in v) + "]"
        else:
            text = _fmt_default(v)
        lines.append(f"    {s.name}: {text}")
    return "\n".join(lines) + "\n"
