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

"""`helpaware store`: look into and look after the belief store file.

Actions: inspect (counts, or one person's belief and asks by perceived id), opt-out, forget,
compact, export (hashed events and asks as CSV for `helpaware fit`), learned (the history of
the site constants learned online).  Perceived ids given here are hashed with
the site key at once and never written anywhere.
"""
from __future__ import annotations

import argparse
import os
import sys
import time

from ..core import CoreInputError
from ..store import default_store_path, load_site_key, SiteKeyError, SqliteStore, StoreVersionError
from ..store.export import EXPORT_COLUMNS, write_csv
from ..store.keys import KEY_FILE_NAME
from ..text_table import fmt, render_table


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--path", default="", help=f"store file (default {default_store_path()})")
    parser.add_argument("--key-file", default="", help="site key file (default: site_key "
                        "beside the store file)")
    acts = parser.add_subparsers(dest="action", metavar="ACTION")
    acts.required = True
    p = acts.add_parser("inspect", help="counts; with --person/--key one person's belief "
                        "and asks")
    _person_args(p, required=False)
    p = acts.add_parser("opt-out", help="stop learning about a person")
    _person_args(p)
    p = acts.add_parser("forget", help="delete every trace of a person (events, asks, "
                        "snapshot, opt-out), securely")
    _person_args(p)
    p = acts.add_parser("compact", help="fold events older than N days into the snapshot "
                        "base and delete them, and asks older than that (beliefs unchanged)")
    p.add_argument("--older-than-days", type=float, required=True, metavar="DAYS")
    p.add_argument("--now", type=float, default=None, metavar="TIME_S",
                   help="reference time in seconds since the epoch (default: now)")
    p = acts.add_parser("export", help="hashed events and asks as CSV (columns: "
                        + ",".join(EXPORT_COLUMNS) + ")")
    p.add_argument("-o", "--out", default="-", help="CSV file to write (default: stdout)")
    p = acts.add_parser("learned", help="the site constants learned online (site_learning), "
                        "revision by revision, and the model beliefs are folded under")
    p.add_argument("--limit", type=int, default=50, metavar="N",
                   help="newest N revisions (default 50)")


def _person_args(p: argparse.ArgumentParser, required: bool = True) -> None:
    g = p.add_mutually_exclusive_group(required=required)
    g.add_argument("--person", metavar="PERCEIVED_ID", help="perceived id (hashed at once)")
    g.add_argument("--key", metavar="PERSON_KEY", help="hashed person key (64 hex digits)")


def open_for_admin(args) -> SqliteStore:
    path = args.path or str(default_store_path())
    if not os.path.exists(path):
        raise SystemExit(f"store: {path} does not exist (give --path)")
    key_file = args.key_file or os.path.join(os.path.dirname(os.path.abspath(path)),
                                             KEY_FILE_NAME)
    site_key = load_site_key(key_file, create=False)
    return SqliteStore(path, "admin", site_key)


def _key(store: SqliteStore, args) -> str:
    if args.person is not None:
        return store.key_for(args.person)
    key = args.key.strip().lower()
    if len(key) != 64 or any(ch not in "0123456789abcdef" for ch in key):
        raise SystemExit("store: --key must be 64 hex digits (a hashed person key)")
    return key


def run(args: argparse.Namespace) -> int:
    try:
        store = open_for_admin(args)
    except (SiteKeyError, StoreVersionError) as exc:
        print(f"store: {exc}", file=sys.stderr)
        return 2
    try:
        if store.health.level != "OK":
            print(f"store: {store.health.level}: {store.health.message}", file=sys.stderr)
        return ACTIONS[args.action](store, args)
    except CoreInputError as exc:
        print(f"store: {exc}", file=sys.stderr)
        return 2
    finally:
        store.close()


def do_inspect(store: SqliteStore, args) -> int:
    if args.person is None and args.key is None:
        counts = store.counts()
        print(f"store {store.path}")
        print(render_table(["item", "value"], [[k, v] for k, v in counts.items()],
                           [False, True]))
        return 0
    key = _key(store, args)
    belief, last = store.belief(key)
    events = store.events_for(key)
    known = key in set(store.keys())
    print(f"person key {key}")
    rows: list[list[object]] = [["known", "yes" if known else "no (site prior)"],
                                ["opted out", "yes" if store.is_opted_out(key) else "no"],
                                ["a", fmt(belief.a, 4)], ["b", fmt(belief.b, 4)],
                                ["mean willingness", fmt(belief.mean, 3)],
                                ["events stored", len(events)],
                                ["last event time_s", "-" if last is None else fmt(last, 1)]]
    asks = store.asks(person_key=key)
    rows.append(["asks stored", len(asks)])
    print(render_table(["item", "value"], rows, [False, True]))
    if asks:
        shown = asks[-INSPECT_ASKS:]
        print(f"asks (newest {len(shown)} of {len(asks)}; every robot's, as the limits "
              f"count them)")
        print(render_table(["time_s", "robot", "request kind", "request id"],
                           [[fmt(a.time_s, 1), a.robot_id, a.request_kind or "-",
                             a.request_id or "-"] for a in shown], [True, False, False, False]))
    return 0


INSPECT_ASKS = 20     # newest asks listed by inspect


def do_opt_out(store: SqliteStore, args) -> int:
    key = _key(store, args)
    store.opt_out(key)
    print(f"opted out {key[:16]}...: no new outcomes will be stored for this person")
    return 0


def do_forget(store: SqliteStore, args) -> int:
    key = _key(store, args)
    n = store.forget(key)
    print(f"forgot {key[:16]}...: {n} event(s) deleted, asks, snapshot and opt-out removed")
    return 0


def do_compact(store: SqliteStore, args) -> int:
    if args.older_than_days < 0:
        print("store: --older-than-days must be >= 0", file=sys.stderr)
        return 2
    now = time.time() if args.now is None else args.now
    asks_before = store.counts()["asks"]
    n = store.compact(args.older_than_days * 86400.0, now_s=now)
    asks_removed = int(asks_before) - int(store.counts()["asks"])
    print(f"compacted {n} event(s) older than {args.older_than_days:g} day(s); "
          f"deleted {asks_removed} ask(s) as old")
    return 0


def do_export(store: SqliteStore, args) -> int:
    if args.out == "-":
        n = write_csv(store, sys.stdout)
    else:
        with open(args.out, "w", newline="", encoding="utf-8") as fh:
            n = write_csv(store, fh)
        print(f"exported {n} row(s) (outcomes and asks) to {args.out}", file=sys.stderr)
    return 0


def do_learned(store: SqliteStore, args) -> int:
    from ..fit.online import LEARNED, NUISANCE
    if args.limit < 1:
        print("store: --limit must be >= 1", file=sys.stderr)
        return 2
    history = store.learned_history(limit=args.limit)
    print(f"store {store.path}")
    if not history:
        print("no learned constants: site learning has not put a revision in force "
              "(site_learning off or propose, or too few outcomes so far)")
        return 0
    short = {"prior_a": "prior_a", "prior_b": "prior_b", "k_busy": "k_busy",
             "k_load": "k_load", "notice_probability": "notice_p",
             "ask_memory_half_life_s": "half_life_s", NUISANCE: "decline_aloud"}
    names = list(LEARNED) + [NUISANCE]
    rows = []
    for e in history:
        rows.append([e.revision, e.recorded_utc or "-", e.robot_id or "-", e.n_outcomes,
                     "yes" if e.verdict.get("converged") else "no"]
                    + [f"{e.constants[n]:.4g}" if n in e.constants else "-" for n in names])
    print(f"learned constants (newest {len(history)} revision(s); the last is in force on the "
          "robot that wrote it while site_learning is apply)")
    print(render_table(["rev", "recorded (UTC)", "robot", "outcomes", "converged"]
                       + [short[n] for n in names], rows,
                       [True, False, False, True, False] + [True] * len(names)))
    last = history[-1]
    print("shrunk towards (parameter file): "
          + ", ".join(f"{short.get(k, k)} {v:.4g}" for k, v in last.target.items()))
    print("beliefs folded under: "
          + ", ".join(f"{short[n]} {getattr(store.model, n):.4g}" for n in LEARNED))
    return 0


ACTIONS = {"inspect": do_inspect, "opt-out": do_opt_out, "forget": do_forget,
           "compact": do_compact, "export": do_export, "learned": do_learned}
