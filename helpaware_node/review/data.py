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

"""Load what a review needs from a bag: decisions, help needs, outcomes, message counts.

Topics are matched by their last name component (`/robot1/decision` is a `decision` topic), so
namespaced bags and bags from `ros2 bag record` read the same.  `people`, `markers` and
`/diagnostics` are only counted: a decision document carries the candidates it was made
from, which is all the review and the replay need.
"""
from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
import json
from typing import Optional

from . import documents as rw
from ..bag import BagReadError, BagSource, deserialize_string

EXPECTED_TOPICS = ("decision", "people", "task_status", "outcome", "markers", "diagnostics")
PARSED_TOPICS = ("decision", "task_status", "outcome")


@dataclass
class DecisionRow:
    time_s: float
    request_id: str
    kind: str
    action: str
    person_key: Optional[str]
    p: Optional[float]                # predicted help probability of the person asked
    why: str
    params_hash: str
    candidates: list[dict]            # rationale rows (person_id, a, b, mean, p, excluded, ...)
    document: dict                    # the decoded decision document (for replay)


@dataclass
class NeedRow:
    time_s: float
    request_id: str
    kind: str
    state: str                        # open, resolved, cancelled


@dataclass
class OutcomeRow:
    time_s: float
    request_id: str
    person_key: str
    result: str


@dataclass
class ReviewData:
    path: str
    storage: str
    decisions: list[DecisionRow] = field(default_factory=list)
    needs: list[NeedRow] = field(default_factory=list)
    outcomes: list[OutcomeRow] = field(default_factory=list)
    counts: Counter = field(default_factory=Counter)         # per topic kind
    topic_names: dict[str, str] = field(default_factory=dict)  # kind -> topic as in the bag
    rejected: Counter = field(default_factory=Counter)        # kind -> documents not understood
    rejected_examples: dict[str, str] = field(default_factory=dict)
    custom_data: dict = field(default_factory=dict)
    error: Optional[BagReadError] = None
    start_s: float = 0.0
    end_s: float = 0.0
    expired_asks: list[DecisionRow] = field(default_factory=list)

    @property
    def missing_topics(self) -> list[str]:
        return [k for k in EXPECTED_TOPICS if self.counts.get(k, 0) == 0]

    def belief_series(self) -> dict[str, list[tuple[float, float, float]]]:
        """Return person key -> [(time s, a, b)] at each decision the person was a candidate in."""
        out: dict[str, list[tuple[float, float, float]]] = {}
        for d in self.decisions:
            for c in d.candidates:
                if c.get("person_id") and c.get("a") and c.get("b"):
                    out.setdefault(c["person_id"], []).append((d.time_s, c["a"], c["b"]))
        return out


def topic_kind(topic: str) -> str:
    return topic.rstrip("/").rsplit("/", 1)[-1]


def _reject(data: ReviewData, kind: str, reason: str) -> None:
    data.rejected[kind] += 1
    data.rejected_examples.setdefault(kind, reason)


def load(path: str) -> ReviewData:
    """Read the bag once; on damage keep what was read and set `error`.

    An intact bag's own index gives the per-topic counts, so only the documents the review
    parses are read; a damaged bag (or one whose index does not add up) is read in full.
    """
    source = BagSource(path)
    data = ReviewData(str(path), source.storage)
    counts = data.counts
    kinds = {topic: topic_kind(topic) for topic in source.info.topics}
    index = source.index_counts
    if index is not None:
        for topic, n in index.items():
            counts[kinds[topic]] += n
        wanted = {t for t, k in kinds.items() if k in PARSED_TOPICS}
    else:
        wanted = None
    first_ns = last_ns = None
    try:
        for topic, t_ns, raw in source.raw(wanted):
            kind = kinds.get(topic)
            if kind is None:      # first seen while salvaging a damaged file
                kind = kinds[topic] = topic_kind(topic)
            if index is None:
                counts[kind] += 1
                if first_ns is None:
                    first_ns = t_ns
                last_ns = t_ns
            if kind not in PARSED_TOPICS:
                continue
            try:
                doc = json.loads(deserialize_string(raw))
            except (ValueError, UnicodeDecodeError) as exc:
                _reject(data, kind, f"not a JSON std_msgs/String: {exc}")
                continue
            t_s = t_ns * 1e-9
            try:
                if kind == "decision":
                    data.decisions.append(_decision_row(doc, t_s))
                elif kind == "outcome":
                    data.outcomes.append(_outcome_row(doc, t_s))
                else:
                    data.needs.append(_need_row(doc, t_s))
            except (rw.WireError, KeyError, TypeError, ValueError) as exc:
                _reject(data, kind, str(exc))
    finally:
        time_range = source.time_range_ns
        source.close()
    if index is not None and time_range is not None:
        first_ns, last_ns = time_range
    data.error = source.error
    data.custom_data = source.info.custom_data
    for topic in source.info.topics:   # topics with no messages still count as present (0)
        data.topic_names.setdefault(topic_kind(topic), topic)
    times = [d.time_s for d in data.decisions] + [n.time_s for n in data.needs] + \
            [o.time_s for o in data.outcomes]
    if first_ns is not None and last_ns is not None:
        times += [first_ns * 1e-9, last_ns * 1e-9]
    data.start_s = min(times) if times else 0.0
    data.end_s = max(times) if times else 0.0
    return data


def _decision_row(doc: dict, bag_time_s: float) -> DecisionRow:
    fields = rw.decision_fields(doc)
    time_s = bag_time_s   # one clock for every row: the recorder's (documents may use sim time)
    cands = fields["candidates"]
    p = None
    if fields["action"] == "ask":
        for c in cands:
            if c.get("person_id") == fields["person_id"]:
                p = c.get("p")
    return DecisionRow(time_s=time_s, request_id=fields["request_id"], kind=fields.get("kind", ""),
                       action=fields["action"], person_key=fields.get("person_id"), p=p,
                       why=fields.get("why", ""), params_hash=fields.get("params_hash", ""),
                       candidates=cands, document=doc)


def _outcome_row(doc: dict, bag_time_s: float) -> OutcomeRow:
    fields = rw.outcome_fields(doc)
    return OutcomeRow(bag_time_s, fields["request_id"],
                      fields["person_id"], fields["result"])


def _need_row(doc: dict, bag_time_s: float) -> NeedRow:
    fields = rw.task_status_fields(doc)
    return NeedRow(bag_time_s, fields["request_id"],
                   fields.get("kind", ""), fields["state"])
