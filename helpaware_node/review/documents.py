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

"""The review's view of the wire documents: the fields it reads, and the builders it writes.

Everything comes from `helpaware_node.wire` (the one definition of the documents); this module
only picks the fields out, so the loader stays independent of document layout details.
"""
from __future__ import annotations

from typing import Mapping, Sequence

from .. import wire
from ..core.model import DecisionConfig, SiteModel
from ..core.policy import Decision, HelpNeed

WireError = wire.WireError
replay_inputs = wire.replay_inputs
recorded_params = wire.recorded_params


def _check_doc(doc: Mapping, name: str) -> None:
    if not isinstance(doc, dict) or doc.get("doc") != name:
        raise WireError(f"doc: expected a {name!r} document, got "
                        f"{doc.get('doc') if isinstance(doc, dict) else type(doc).__name__!r}")


def decision_fields(doc: Mapping) -> dict:
    _check_doc(doc, "decision")
    return {"time_s": float(doc["stamp_s"]), "request_id": doc["request_id"],
            "kind": doc.get("need", {}).get("kind", ""), "action": doc["action"],
            "person_id": doc.get("person_id"), "why": doc.get("why", ""),
            "params_hash": doc.get("params_hash", ""), "candidates": doc.get("rationale", [])}


def outcome_fields(doc: Mapping) -> dict:
    _check_doc(doc, "outcome")
    out = {"request_id": doc["request_id"], "person_id": doc["person_id"],
           "result": doc["result"]}
    if doc.get("stamp_s") is not None:
        out["time_s"] = float(doc["stamp_s"])
    return out


def task_status_fields(doc: Mapping) -> dict:
    _check_doc(doc, "task_status")
    out = {"request_id": doc["request_id"], "state": doc["state"], "kind": doc.get("kind", "")}
    if doc.get("stamp_s") is not None:
        out["time_s"] = float(doc["stamp_s"])
    return out


def parameters_of(doc: Mapping):
    return doc.get("parameters") if isinstance(doc, dict) else None


# builders (used by the sample bag writer and tests)

def people_document(obs, stamp_s: float) -> str:
    return wire.people_document([{"id": pid, "busyness": busy, "distance_m": dist,
                                  "activity": act} for pid, busy, dist, act in obs], stamp_s)


def task_status_document(need: HelpNeed, state: str, stamp_s: float) -> str:
    return wire.task_status_document(need.request_id, state, kind=need.kind,
                                     urgency=need.urgency, stamp_s=stamp_s)


def outcome_document(request_id: str, person_id: str, result, stamp_s: float) -> str:
    return wire.outcome_document(request_id, person_id, result, stamp_s)


def decision_document(decision: Decision, robot_ask_times_s: Sequence[float],
                      model: SiteModel, config: DecisionConfig) -> str:
    return wire.decision_text(decision, robot_ask_times_s, model, config, robot_id="sample")
