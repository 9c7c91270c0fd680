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

"""What the node's topics carry, and replacing perceived person ids in them by hashed keys.

A bag written by `helpaware record` holds the HMAC of each perceived id under the site key
(the same key the store uses), never the id itself, unless the recording was told to keep them.
"""
from __future__ import annotations

import json
from typing import Callable

from .types import deserialize_string, serialize_string
from ..store.base import person_key

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
    """Return the document with every person id replaced by key_of(id) (a new object)."""
    if isinstance(doc, dict):
        out = {}
        for k, v in doc.items():
            if k in PERSON_ID_FIELDS and isinstance(v,
                                                    str) and (k == "person_id" or inside_person):
                out[k] = key_of(v)
            else:
                out[k] = hash_ids_in(v, key_of,
                                     inside_person=k in ("people", "persons", "candidates"))
        return out
    if isinstance(doc, list):
        return [hash_ids_in(v, key_of, inside_person) for v in doc]
    return doc


def id_hasher(site_key: bytes) -> Callable[[bytes], bytes]:
    """Return a transform of raw std_msgs/String bytes: JSON in, JSON with hashed ids out."""
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
