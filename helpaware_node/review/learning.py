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

"""Site learning as a bag shows it.

The site constants each decision was made with, over time, and the calibration of the asks made
under the parameter file's constants beside those made under learned ones.

Every decision document carries its model and where its constants came from
(`parameters.source`: parameter_file or learned, with the revision), so this needs nothing but
the bag.  Calibration is split by the constants in force at each ask: each answered ask is
scored with the p its own decision predicted.
"""
from __future__ import annotations

import math
from typing import Optional

from . import documents as rw
from .data import ReviewData
from .metrics import brier_score, log_loss, reliability_bins
from .summary import ANSWERED, outcome_for

CONSTANTS = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
             "ask_memory_half_life_s")


def _source(doc: dict) -> tuple[str, int]:
    try:
        return rw.wire.recorded_source(doc)
    except (TypeError, ValueError):
        return "parameter_file", 0


def constants_over_time(data: ReviewData) -> list[dict]:
    """One row per change of the site constants in force (the first decision's included).

    time_s, source, revision, and each constant.
    """
    rows: list[dict] = []
    for d in sorted(data.decisions, key=lambda d: d.time_s):
        params = rw.parameters_of(d.document) or {}
        model = params.get("model") if isinstance(params, dict) else None
        if not isinstance(model, dict):
            continue
        kind, revision = _source(d.document)
        values = {k: float(model[k]) for k in CONSTANTS if isinstance(model.get(k), (int, float))}
        if rows and (rows[-1]["source"], rows[-1]["revision"]) == (kind, revision) \
                and all(rows[-1].get(k) == v for k, v in values.items()):
            continue
        rows.append({"time_s": d.time_s, "source": kind, "revision": revision, **values})
    return rows


def _scores(p: list[float], y: list[int]) -> dict:
    finite = lambda v: None if v is None or not math.isfinite(v) else v   # noqa: E731
    return {"answered_asks": len(p), "brier_score": finite(brier_score(p, y)),
            "log_loss": finite(log_loss(p, y)), "bins": reliability_bins(p, y),
            "mean_predicted": sum(p) / len(p) if p else None,
            "observed_rate": sum(y) / len(y) if y else None}


def calibration_by_source(data: ReviewData) -> dict:
    """Return the calibration of asks under the file's constants and under learned ones.

    Calibration of the asks made under the parameter file's constants and of those made under
    learned constants (any revision).
    """
    results = outcome_for(data)
    split: dict[str, tuple[list, list]] = {"parameter_file": ([], []), "learned": ([], [])}
    for d in data.decisions:
        if d.action != "ask" or d.p is None:
            continue
        r = results.get((d.request_id, d.person_key or ""))
        if r in ANSWERED:
            p, y = split["learned" if _source(d.document)[0] == "learned" else "parameter_file"]
            p.append(float(d.p))
            y.append(ANSWERED[r])
    return {k: _scores(p, y) for k, (p, y) in split.items()}


def summarise(data: ReviewData) -> Optional[dict]:
    """Return the site-learning section of the summary.

    The site-learning section of the summary (None when the bag has no decisions with their
    parameters).
    """
    changes = constants_over_time(data)
    if not changes:
        return None
    learned = [c for c in changes if c["source"] == "learned"]
    return {"changes": changes, "revisions_seen": sorted({c["revision"] for c in learned}),
            "first_learned_s": learned[0]["time_s"] if learned else None,
            "calibration": calibration_by_source(data)}
