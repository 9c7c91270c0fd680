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

"""The store's events and asks as CSV (hashed keys only).

What `helpaware store export` writes and `helpaware fit` reads.

One row per stored outcome (`record` outcome) and per stored ask (`record` ask), merged in
(time, event id) order. An ask row has no busyness, ask load or result (it is not evidence:
fit skips it); an outcome row has no request id (outcomes are stored without one).
"""
from __future__ import annotations

import csv
import heapq
from typing import TextIO

from .sqlite import SqliteStore

EXPORT_COLUMNS = ("event_id", "person_key", "time_s", "busyness", "ask_load", "result",
                  "request_kind", "record", "request_id")
OUTCOME_RECORD, ASK_RECORD = "outcome", "ask"


def write_csv(store: SqliteStore, handle: TextIO) -> int:
    """Every stored outcome and ask in (time, event id) order; returns how many rows."""
    w = csv.writer(handle, lineterminator="\n")
    w.writerow(EXPORT_COLUMNS)
    outcomes = ((e.time_s, e.event_id, [e.event_id, e.person_key, repr(float(e.time_s)),
                                        repr(float(e.busyness)), repr(float(e.ask_load)),
                                        e.result.value, e.request_kind, OUTCOME_RECORD, ""])
                for e in store.iter_events())
    asks = ((a.time_s, a.event_id, [a.event_id, a.person_key, repr(float(a.time_s)), "", "",
                                    "", a.request_kind, ASK_RECORD, a.request_id])
            for a in store.iter_asks())
    n = 0
    for _, _, row in heapq.merge(outcomes, asks, key=lambda r: (r[0], r[1])):
        w.writerow(row)
        n += 1
    return n
