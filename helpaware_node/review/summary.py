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

"""The numbers of a review, from loaded bag data: one plain dict (summary.json) and CSV rows."""
from __future__ import annotations

from collections import Counter
import math
from typing import Optional

from .data import DecisionRow, ReviewData
from .metrics import beta_interval, brier_score, log_loss, reliability_bins

ANSWERED = {"helped": 1, "declined": 0, "no_response": 0}   # could_not_ask: no evidence
DEFAULT_PENDING_TIMEOUT_S = 120.0   # the node's pending_ask_timeout_s default


def outcome_for(data: ReviewData) -> dict[tuple[str, str], str]:
    """(request id, person key) -> result (the first outcome reported for that ask)."""
    out: dict[tuple[str, str], str] = {}
    for o in data.outcomes:
        out.setdefault((o.request_id, o.person_key), o.result)
    return out


def calibration_pairs(data: ReviewData) -> tuple[list[float], list[int]]:
    """Predicted p of the person asked and whether they helped, for every answered ask."""
    results = outcome_for(data)
    p, y = [], []
    for d in data.decisions:
        if d.action != "ask" or d.p is None:
            continue
        r = results.get((d.request_id, d.person_key or ""))
        if r in ANSWERED:
            p.append(float(d.p))
            y.append(ANSWERED[r])
    return p, y


def find_expired(data: ReviewData, timeout_s: float) -> list[DecisionRow]:
    """Return the asks with no outcome within `timeout_s`.

    Asks with no outcome within `timeout_s` (asks younger than that at the bag's end are still
    pending, not expired).
    """
    answered = outcome_for(data)
    expired = []
    for d in data.decisions:
        if d.action == "ask" and (d.request_id, d.person_key or "") not in answered:
            if data.end_s - d.time_s >= timeout_s:
                expired.append(d)
    return expired


def pending_timeout_s(data: ReviewData, given: Optional[float]) -> float:
    if given is not None:
        return given
    for d in data.decisions:
        params = (d.document.get("parameters") or {}) if isinstance(d.document, dict) else {}
        for section in (params, params.get("node", {}) if isinstance(params, dict) else {}):
            if isinstance(section, dict):
                for name in ("pending_ask_timeout_s", "outcome_timeout_s", "ask_timeout_s"):
                    if isinstance(section.get(name), (int, float)):
                        return float(section[name])
    return DEFAULT_PENDING_TIMEOUT_S


def _finite(x: float) -> Optional[float]:
    return None if x is None or (isinstance(x, float) and not math.isfinite(x)) else x


def summarise(data: ReviewData, pending_timeout: Optional[float] = None) -> dict:
    timeout = pending_timeout_s(data, pending_timeout)
    data.expired_asks = find_expired(data, timeout)
    asks = [d for d in data.decisions if d.action == "ask"]
    p, y = calibration_pairs(data)
    brier, ll = brier_score(p, y), log_loss(p, y)
    limits = Counter(c["excluded"] for d in data.decisions for c in d.candidates
                     if c.get("excluded"))
    limit_decisions: Counter[str] = Counter()
    for d in data.decisions:
        for code in {c["excluded"] for c in d.candidates if c.get("excluded")}:
            limit_decisions[code] += 1
    asks_per_person = Counter(d.person_key for d in asks)
    asks_per_hour = Counter(int((d.time_s - data.start_s) // 3600) for d in asks)
    series = data.belief_series()
    people = {}
    for key, pts in sorted(series.items()):
        t, a, b = max(pts)
        lo, hi = beta_interval(a, b, 0.9)
        people[key] = {"decisions_seen": len(pts), "asks": asks_per_person.get(key, 0),
                       "last_time_s": t, "a": a, "b": b, "mean": a / (a + b),
                       "interval_90": [float(lo), float(hi)]}
    hashes = Counter(d.params_hash for d in data.decisions)
    params_by_hash = {}
    for d in data.decisions:
        if d.params_hash not in params_by_hash and isinstance(d.document, dict) \
                and d.document.get("parameters") is not None:
            params_by_hash[d.params_hash] = d.document["parameters"]
    summary = {
        "bag": data.path,
        "storage": data.storage,
        "complete": data.error is None,
        "read_error": str(data.error) if data.error else None,
        "start_s": data.start_s,
        "end_s": data.end_s,
        "duration_s": data.end_s - data.start_s,
        "messages": dict(sorted(data.counts.items())),
        "topics": dict(sorted(data.topic_names.items())),
        "missing_topics": data.missing_topics,
        "documents_not_understood": dict(data.rejected),
        "documents_not_understood_examples": dict(data.rejected_examples),
        "help_needs": dict(Counter(n.state for n in data.needs)),
        "decisions": len(data.decisions),
        "asks": len(asks),
        "continues": len(data.decisions) - len(asks),
        "decision_reasons": dict(Counter(d.why for d in data.decisions)),
        "outcomes": dict(Counter(o.result for o in data.outcomes)),
        "calibration": {"answered_asks": len(p), "brier_score": _finite(brier),
                        "log_loss": _finite(ll), "bins": reliability_bins(p, y)},
        "asks_per_person": dict(sorted(asks_per_person.items(), key=lambda kv: (-kv[1], kv[0]))),
        "asks_per_hour": {str(h): n for h, n in sorted(asks_per_hour.items())},
        "limits_fired": {"candidates_excluded": dict(limits.most_common()),
                         "decisions_with_limit": dict(limit_decisions.most_common())},
        "pending_asks": {"timeout_s": timeout, "expired": len(data.expired_asks),
                         "expired_request_ids": [d.request_id for d in data.expired_asks],
                         "still_pending_at_end": sum(
                             1 for d in asks if (d.request_id, d.person_key or "")
                             not in outcome_for(data)) - len(data.expired_asks)},
        "people": people,
        "parameters": {"hashes": dict(hashes), "in_force": params_by_hash,
                       "bag_custom_data": data.custom_data},
        "person_ids": data.custom_data.get("helpaware.person_ids", "unknown"),
    }
    return summary


CSV_COLUMNS = ["time_s", "request_id", "kind", "action", "person_key", "p", "why",
               "params_hash", "candidates", "excluded", "outcome"]


def decision_rows(data: ReviewData) -> list[dict]:
    results = outcome_for(data)
    expired = {(d.request_id, d.person_key) for d in data.expired_asks}
    rows = []
    for d in data.decisions:
        outcome = ""
        if d.action == "ask":
            outcome = results.get((d.request_id, d.person_key or ""),
                                  "expired" if (d.request_id, d.person_key) in expired
                                  else "pending")
        rows.append({"time_s": f"{d.time_s:.3f}", "request_id": d.request_id, "kind": d.kind,
                     "action": d.action, "person_key": d.person_key or "",
                     "p": "" if d.p is None else f"{d.p:.6f}", "why": d.why,
                     "params_hash": d.params_hash, "candidates": len(d.candidates),
                     "excluded": sum(1 for c in d.candidates if c.get("excluded")),
                     "outcome": outcome})
    return rows
