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

"""`helpaware record`: write the node's topics into a rosbag2 MCAP bag (no ROS CLI needed).

By default the perceived person ids on `decision` and `people` are replaced by the hashed
person key (HMAC with the site key), so the bag holds no raw ids; `--keep-raw-ids` keeps them.
A generic recorder (`ros2 bag record`) stores whatever the topics carry, raw ids included.
"""
from __future__ import annotations

import argparse
import datetime
from pathlib import Path
import sys
from typing import Optional

from ..bag import BagWriter
from ..bag.person_ids import HASHED_MARK, id_hasher, ID_TOPICS, NODE_TOPICS


def load_site_key(path: Optional[str]) -> bytes:
    """Return the site key the store uses (`store.load_site_key`).

    From --site-key-file, else the store's default key file.  Never created here: a new key would
    not match the store.
    """
    from ..store import default_key_path, load_site_key as store_load_site_key, SiteKeyError
    try:
        return store_load_site_key(path or None, create=False)
    except SiteKeyError as exc:
        hint = "" if path else f" (the default {default_key_path()})"
        raise SystemExit(f"record: {exc}{hint}; give --site-key-file FILE (the site key, "
                         "readable only by its owner) or --keep-raw-ids") from None
    except OSError as exc:
        raise SystemExit(f"record: site key file {path}: {exc.strerror}") from None


def parse_topic(text: str) -> tuple[str, Optional[str]]:
    """'name' or 'name:pkg/msg/Type'."""
    name, _, msgtype = text.partition(":")
    return name, (msgtype or None)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("-o", "--out", help="bag directory to create (must not exist; default "
                        "helpaware_<UTC time>)")
    parser.add_argument("--topic", action="append", default=[], metavar="NAME[:TYPE]",
                        help="record this topic too (repeatable)")
    parser.add_argument("--duration", type=float, metavar="SECONDS",
                        help="stop by itself after this many seconds")
    parser.add_argument("--namespace", default="", help="namespace of the node's topics")
    parser.add_argument("--use-sim-time", action="store_true",
                        help="stamp messages with /clock time (as a node with use_sim_time)")
    parser.add_argument("--site-key-file", metavar="FILE",
                        help="site key used to hash person ids (HMAC-SHA256); default: the "
                        "store's key file under the ROS home")
    parser.add_argument("--keep-raw-ids", action="store_true",
                        help="keep perceived person ids in the bag (not recommended)")


def run(args: argparse.Namespace) -> int:
    out = args.out or datetime.datetime.now(datetime.timezone.utc).strftime(
        "helpaware_%Y%m%dT%H%M%SZ")
    if Path(out).exists():
        print(f"record: {out} exists already; give a new --out", file=sys.stderr)
        return 2
    if args.duration is not None and args.duration <= 0:
        print(f"record: --duration {args.duration} must be > 0 seconds", file=sys.stderr)
        return 2
    topics: dict[str, Optional[str]] = dict(NODE_TOPICS)
    for text in args.topic:
        name, msgtype = parse_topic(text)
        topics[name] = msgtype
    transforms = {}
    custom = {}
    if args.keep_raw_ids:
        print("warning: --keep-raw-ids: the bag will hold perceived person ids; treat it as "
              "personal data", file=sys.stderr)
        custom[HASHED_MARK] = "raw"
    else:
        site_key = load_site_key(args.site_key_file)
        hasher = id_hasher(site_key)
        transforms = {t: hasher for t in ID_TOPICS}
        custom[HASHED_MARK] = "hmac-sha256"
        from ..store import key_fingerprint
        custom["helpaware.site_key_fingerprint"] = key_fingerprint(site_key)
    from ..ros.bag_recorder import record
    writer = BagWriter(out, custom_data=custom)
    counts = record(writer, topics, transforms, duration_s=args.duration,
                    namespace=args.namespace, use_sim_time=args.use_sim_time)
    print(f"bag written: {out} ({sum(counts.values())} messages)")
    return 0
