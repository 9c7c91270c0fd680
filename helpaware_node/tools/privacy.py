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

"""`helpaware privacy`: opt a person out, or erase them, on every robot of the site.

The request is signed with the site key file (the only thing the console needs), sent on the
site-wide privacy topic, and every robot that applies it answers on the fleet topic; this
command lists them.  A perceived id given with --person is hashed here at once: only the
hashed key travels.  `keys` shows the site id and key ids of a key file (never the keys);
`rotate-signing-key` gives the site a new signing key (docs/security.md).
"""
from __future__ import annotations

import argparse
import sys
import time

from ..core import CoreInputError
from ..signing import utc_text
from ..store import default_key_path, load_site_keys, person_key, SiteKeyError
from ..store.keys import rotate_signing_key

DAY_S = 86400.0


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--key-file", default="", help=f"site key file, the same file the "
                        f"robots use (default {default_key_path()})")
    acts = parser.add_subparsers(dest="action", metavar="ACTION")
    acts.required = True
    for name, text in (("opt-out", "never ask or learn about this person again, on every robot"),
                       ("forget", "erase every trace of this person on every robot")):
        p = acts.add_parser(name, help=text, description=text)
        g = p.add_mutually_exclusive_group(required=True)
        g.add_argument("--person", metavar="PERCEIVED_ID", help="perceived id (hashed at once)")
        g.add_argument("--key", metavar="PERSON_KEY", help="hashed person key (64 hex digits)")
        p.add_argument("--robots", type=int, default=0, metavar="N",
                       help="wait for N robots to answer (default: as many as are listening)")
        p.add_argument("--wait-s", type=float, default=10.0, metavar="S",
                       help="seconds to wait for robots to listen, then to answer (default 10)")
        p.add_argument("--topic", default="", help="privacy topic (default: the robots' "
                       "default, /helpaware/privacy_request)")
        p.add_argument("--fleet-topic", default="", help="fleet topic the answers come on "
                       "(default /helpaware/fleet)")
    acts.add_parser("keys", help="site id, signing key ids and the previous key's window")
    p = acts.add_parser("rotate-signing-key", help="new signing key; the current one stays "
                        "accepted for the window (person keys unchanged)")
    p.add_argument("--window-days", type=float, required=True, metavar="DAYS",
                   help="how long robots still accept the current key (time to copy the "
                   "new file to every robot)")
    p.add_argument("--force", action="store_true",
                   help="rotate even though the previous key's window has not ended")


def run(args: argparse.Namespace) -> int:
    path = args.key_file or str(default_key_path())
    try:
        if args.action == "rotate-signing-key":
            return _rotate(path, args)
        keys = load_site_keys(path, create=False)
    except SiteKeyError as exc:
        print(f"privacy: {exc}", file=sys.stderr)
        return 2
    if args.action == "keys":
        return _show(keys)
    try:
        key = _person_key(keys.person_id_key, args)
        return _send(args.action.replace("-", "_"), key, keys, args)
    except CoreInputError as exc:
        print(f"privacy: {exc}", file=sys.stderr)
        return 2


def _person_key(person_id_key: bytes, args) -> str:
    if args.person is not None:
        return person_key(person_id_key, args.person)
    key = args.key.strip().lower()
    if len(key) != 64 or any(ch not in "0123456789abcdef" for ch in key):
        raise CoreInputError("--key must be 64 hex digits (a hashed person key)")
    return key


def _send(action: str, key: str, keys, args) -> int:
    from ..ros.privacy import PRIVACY_TOPIC, send_privacy_request
    if args.robots < 0 or not args.wait_s > 0:
        print("privacy: --robots must be >= 0 and --wait-s > 0", file=sys.stderr)
        return 2
    topic = args.topic or PRIVACY_TOPIC
    print(f"{action} for person key {key[:12]}... (site {keys.site_id}): waiting up to "
          f"{args.wait_s:g} s for robots on {topic}", flush=True)
    result = send_privacy_request(
        action, key, keys.key_ring(), topic=topic, fleet_topic=args.fleet_topic,
        robots=args.robots, wait_s=args.wait_s,
        on_confirmed=lambda robot: print(f"  applied by {robot}", flush=True))
    if result.subscribers == 0:
        print(f"privacy: nobody listens on {topic}: are the robots running, with this "
              "ROS_DOMAIN_ID and discovery range?", file=sys.stderr)
        return 1
    target = args.robots or result.subscribers
    n = len(result.confirmed_by)
    print(f"request {result.request_id}: {n} of {target} robot(s) answered within "
          f"{result.elapsed_s:.1f} s")
    if n < target:
        print(f"privacy: {target - n} listener(s) did not answer: a robot with another site "
              "key file refuses the request (see privacy_request.refused.* in its "
              "/diagnostics); robots that missed it get it from the others' answers",
              file=sys.stderr)
        return 3
    return 0


def _show(keys) -> int:
    ring = keys.key_ring()
    print(f"site key file  {keys.path}")
    print(f"site id        {ring.site_id}")
    print(f"signing key id {ring.current.key_id}")
    if ring.previous is not None:
        state = "accepted" if time.time() <= ring.previous_until_s else "no longer accepted"
        print(f"previous key   {ring.previous.key_id}, {state} until "
              f"{utc_text(ring.previous_until_s)}")
    return 0


def _rotate(path: str, args) -> int:
    if not args.window_days >= 0:
        print("privacy: --window-days must be >= 0", file=sys.stderr)
        return 2
    new = rotate_signing_key(path, args.window_days * DAY_S, force=args.force)
    ring = new.key_ring()
    assert ring.previous is not None   # a rotation keeps the previous key for the window
    print(f"{path}: new signing key {ring.current.key_id}; the previous key "
          f"{ring.previous.key_id} is accepted until {utc_text(ring.previous_until_s)}.")
    print("Copy this file to every robot and console of the site (owner-only, mode 600) and "
          "restart the nodes before then; person keys are unchanged.")
    return 0
