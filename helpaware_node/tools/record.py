"""`helpaware record`: write the node's topics into a rosbag2 MCAP bag (no ROS CLI needed).

By default the perceived person ids on `decision` and `people` are replaced by the hashed
person key (HMAC with the site key), so the bag holds no raw ids; `--keep-raw-ids` keeps them.
A generic recorder (`ros2 bag record`) stores whatever the topics carry, raw ids included.
"""
from __future__ import annotations

import argparse
import datetime
import json
import sys
from pathlib import Path
from typing import Callable, Optional

from ..store.base import person_key
from .bagio import BagWriter, deserialize_string, serialize_string

NODE_TOPICS = {
    "decision": "std_msgs/msg/String",
    "people": "std_msgs/msg/String",
    "task_status": "std_msgs/msg/String",
    "outcome": "std_msgs/msg/String",
    "markers": "visualization_msgs/msg/MarkerArray",
    "/diagnostics": "diagnostic_msgs/msg/DiagnosticArray",
}
ID_TOPICS = ("decision", "people", "outcome")   # the topics that carry perceived ids
# JSON fields that hold a perceived person id, wherever they appear in a document
PERSON_ID_FIELDS = frozenset({"person_id", "id"})
HASHED_MARK = "helpaware.person_ids"


def hash_ids_in(doc, key_of: Callable[[str], str], inside_person: bool = False):
    """The document with every person id replaced by key_of(id) (a new object)."""
    if isinstance(doc, dict):
        out = {}
        for k, v in doc.items():
            if k in PERSON_ID_FIELDS and isinstance(v, str) and (k == "person_id" or inside_person):
                out[k] = key_of(v)
            else:
                out[k] = hash_ids_in(v, key_of, inside_person=k in ("people", "persons", "candidates"))
        return out
    if isinstance(doc, list):
        return [hash_ids_in(v, key_of, inside_person) for v in doc]
    return doc


def id_hasher(site_key: bytes) -> Callable[[bytes], bytes]:
    """A transform of raw std_msgs/String bytes: JSON in, JSON with hashed ids out."""
    cache: dict[str, str] = {}

    def key_of(raw_id: str) -> str:
        k = cache.get(raw_id)
        if k is None:
            k = cache[raw_id] = person_key(site_key, raw_id)
        return k

    def transform(data: bytes) -> bytes:
        try:
            doc = json.loads(deserialize_string(data))
        except (ValueError, UnicodeDecodeError) as exc:
            raise ValueError(f"not a JSON document: {exc}") from None
        return serialize_string(json.dumps(hash_ids_in(doc, key_of), separators=(",", ":")))

    return transform


def load_site_key(path: Optional[str]) -> bytes:
    """The site key the store uses (`store.load_site_key`): from --site-key-file, else the
    store's default key file.  Never created here: a new key would not match the store."""
    from ..store import SiteKeyError, default_key_path
    from ..store import load_site_key as store_load_site_key
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
