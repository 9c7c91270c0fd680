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

"""Outcomes from bags, each joined with the decision that asked.

Outcomes from bags: each outcome joined with the decision that asked (same request id and person),
whose candidate row carries the busyness and ask load in force at the ask, and the person's ask
times the robot remembered then (so the half-life can be estimated: the load is recomputed from
them under each candidate half-life).  Those are the asks the robot counted (its own, and peers'
while count_peer_asks was on) within its ask-history horizon. Uses the review's bag loader
(review/data.py over the bag package).
"""
from __future__ import annotations

from .data import AskAges, FitInputError, from_arrays, OutcomeData, RESULT_CODE
from ..core.person import Result


def read_outcome_bags(paths) -> OutcomeData:
    try:
        from ..review import data as review_data
    except ImportError as exc:   # the bag reader is not available in this checkout
        raise FitInputError(f"reading bags needs review/data.py ({exc}); "
                            "export the outcomes to CSV instead") from None
    person, xs, fs, res, ages, skipped = [], [], [], [], [], 0
    for path in paths:
        try:
            bag = review_data.load(str(path))
        except Exception as exc:   # BagReadError and friends: name the bag
            raise FitInputError(f"{path}: cannot read bag ({exc})") from None
        asked = {}
        for d in bag.decisions:
            if d.action == "ask" and d.person_key:
                rows = d.document.get("candidates", [])
                history: list[float] = next((c.get("ask_times_s", []) for c in rows
                                             if c.get("person_id") == d.person_key), [])
                stamp = float(d.document.get("stamp_s", d.time_s))
                for cand in d.candidates:
                    if cand.get("person_id") == d.person_key:
                        asked[(d.request_id, d.person_key)] = (cand, [stamp - float(t)
                                                                      for t in history])
        for o in sorted(bag.outcomes, key=lambda o: (o.person_key, o.time_s)):
            result = Result.parse(o.result)
            if result is Result.COULD_NOT_ASK:
                continue
            found = asked.get((o.request_id, o.person_key))
            if found is None:
                skipped += 1
                continue
            cand, prior = found
            ages.append(prior)
            person.append(o.person_key)
            xs.append(float(cand["busyness"]))
            fs.append(float(cand["ask_load"]))
            res.append(RESULT_CODE[result])
    if not res:
        raise FitInputError(f"{', '.join(map(str, paths))}: no answered asks joined to their "
                            f"decisions ({skipped} outcomes without a matching ask)")
    keys = sorted(set(person))
    return from_arrays(person, xs, fs, res, keys, sources=[str(p) for p in paths],
                       prior_asks=AskAges.from_lists(ages))
