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

"""Counterfactual replay: every recorded help need re-decided by core.policy.decide.

Each need is replayed with what the node had at that moment (the candidates, their beliefs and
recent asks, the robot's recent asks), as the decision document recorded them.  Under each
parameter set the model gives, for the person it would ask, the predicted help probability p
and the interruption cost I; from those come expected helps and expected time lost.  These are
estimates: people who were not asked gave no outcome, and later beliefs would differ once
different asks had been made (each need is replayed on the recorded history).
"""
from __future__ import annotations

from typing import Optional

from . import documents as rw
from .data import ReviewData
from ..core.model import DecisionConfig, params_hash, SiteModel
from ..core.policy import decide, Decision


def expected_costs(decision: Decision, ask_time_s: float) -> dict:
    """p, interruption and expected robot-seconds lost for one decision under its own model."""
    ev = decision.evaluation
    if decision.action != "ask":
        return {"ask": 0, "p": 0.0, "interruption_s": 0.0, "time_lost_s": ev.continue_cost_s}
    i = decision.person_index
    p = float(ev.p[i])
    lost = p * ev.help_time_s + (1.0 - p) * (ask_time_s + ev.continue_cost_s)
    return {"ask": 1, "p": p, "interruption_s": float(ev.interruption_s[i]), "time_lost_s": lost}


def _never(_ev) -> None:
    return None


def replay_one(document: dict, model: SiteModel, config: DecisionConfig) -> Decision:
    """Decide again.

    A decision the node forced to continue (its policy is not the look-ahead, e.g. the per-need ask
    limit or the operator switch) is forced again: those are node settings the parameter set does
    not change.
    """
    need, candidates, now_s, robot_asks = rw.replay_inputs(document)
    policy = document.get("policy", "lookahead")
    if policy != "lookahead":
        return decide(need, candidates, now_s, robot_asks, model, config, chooser=_never,
                      policy=policy)
    return decide(need, candidates, now_s, robot_asks, model, config)


def describe(decision: Decision) -> str:
    return f"ask {decision.person_id}" if decision.action == "ask" else \
        f"continue ({decision.why})"


def _totals(label: str, decisions: list[Decision], configs: list[DecisionConfig]) -> dict:
    rows = [expected_costs(d, c.ask_time_s) for d, c in zip(decisions, configs)]
    return {"label": label, "asks": sum(r["ask"] for r in rows),
            "expected_helps": sum(r["p"] for r in rows),
            "expected_interruption_s": sum(r["interruption_s"] for r in rows),
            "expected_time_lost_s": sum(r["time_lost_s"] for r in rows)}


def replay(data: ReviewData, other_model: Optional[SiteModel] = None,
           other_config: Optional[DecisionConfig] = None, params_file: str = "") -> dict:
    """Replay the recorded parameters (they must reproduce every decision) beside the others."""
    recorded, other, changes, mismatches = [], [], [], []
    rec_configs, other_configs = [], []
    skipped = 0
    other_pair = None
    for row in data.decisions:
        try:
            model, config = rw.recorded_params(row.document)
        except (rw.WireError, KeyError, TypeError, ValueError):
            skipped += 1
            continue
        again = replay_one(row.document, model, config)
        recorded.append(again)
        rec_configs.append(config)
        if (again.action, again.person_id) != (row.action, row.person_key if row.action == "ask"
                                               else None):
            mismatches.append({"request_id": row.request_id,
                               "recorded": f"{row.action} {row.person_key or ''}".strip(),
                               "replayed": describe(again)})
        if other_model is not None or other_config is not None:
            om = other_model or model
            oc = other_config or config
            alt = replay_one(row.document, om, oc)
            other.append(alt)
            other_configs.append(oc)
            other_pair = other_pair or (om, oc)
            if (alt.action, alt.person_id) != (again.action, again.person_id):
                changes.append({"request_id": row.request_id, "recorded": describe(again),
                                "other": describe(alt)})
    totals = [_totals("recorded", recorded, rec_configs)]
    if other:
        totals.append(_totals("other", other, other_configs))
    other_hash = params_hash(*other_pair) if other_pair else ""
    return {"params_file": params_file, "other_hash": other_hash, "needs": len(recorded),
            "skipped": skipped, "reproduced": len(recorded) - len(mismatches),
            "mismatches": mismatches, "changed": len(changes), "changes": changes,
            "totals": totals, "estimates": True,
            "note": "model-based estimates; outcomes of people not asked are unknown"}
