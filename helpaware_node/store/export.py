"""The store's events as CSV (hashed keys only): what `helpaware store export` writes and
`helpaware fit` reads."""
from __future__ import annotations

import csv
from typing import TextIO

from .sqlite import SqliteStore

EXPORT_COLUMNS = ("event_id", "person_key", "time_s", "busyness", "ask_load", "result",
                  "request_kind")


def write_csv(store: SqliteStore, handle: TextIO) -> int:
    """Every stored event in (time, event id) order; returns how many were written."""
    w = csv.writer(handle, lineterminator="\n")
    w.writerow(EXPORT_COLUMNS)
    n = 0
    for e in store.iter_events():
        w.writerow([e.event_id, e.person_key, repr(float(e.time_s)), repr(float(e.busyness)),
                    repr(float(e.ask_load)), e.result.value, e.request_kind])
        n += 1
    return n
