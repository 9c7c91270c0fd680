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

"""The site key file across a rotation of the signing key (store/keys.py), without ROS.

A rotation must keep every person key (stores, bags and exports stay valid: checked by opening
a store made before it and reading a belief back by perceived id), give a new signing key, and
keep the previous one accepted until the stated end and not after.  Times are compared with
calendar.timegm of the written UTC text (the standard library, not the code under test).
"""
import calendar
import hashlib
import hmac
import json
import os
import stat
import time

from helpaware_node.core import Result
from helpaware_node.core.model import CoreInputError
from helpaware_node.fleet_documents import decode_document, encode_document, refusal_reason
from helpaware_node.store import load_site_key, load_site_keys, SqliteStore, StoredEvent
from helpaware_node.store.keys import (
    FILE_HEADER,
    key_fingerprint,
    parse_site_key_file,
    rotate_signing_key,
    SiteKeyError,
)
import pytest
from site_keys import write_site_key

RAW_KEY = bytes(range(1, 33))
NOW_S = 1_764_632_000.0
DAY_S = 86400.0


def test_a_raw_key_file_is_one_key_for_both_jobs_through_two_derived_keys(tmp_path):
    path = write_site_key(tmp_path, RAW_KEY)
    keys = load_site_keys(path, create=False)
    assert keys.person_id_key == keys.signing_root == RAW_KEY
    assert keys.previous_signing_root is None
    assert keys.site_id == hashlib.sha256(b"helpaware.site-key-fingerprint\x00"
                                          + RAW_KEY).hexdigest()[:16]
    assert load_site_key(path, create=False) == RAW_KEY


def test_rotation_keeps_person_keys_and_accepts_the_previous_key_until_the_stated_end(
        tmp_path):
    path = write_site_key(tmp_path, RAW_KEY)
    store = SqliteStore(tmp_path / "beliefs.sqlite3", "ward3", load_site_keys(path))
    nurse = store.key_for("nurse-ingrid")
    store.append(StoredEvent("ward3/1", nurse, 10.0, Result.HELPED, 0.1, 0.0))
    before = store.belief(nurse)
    old_ring = store.site_keys.key_ring()
    old_doc = encode_document("outcome", store.events_for(nurse)[0], old_ring)
    store.close()

    rotated = rotate_signing_key(path, 3 * DAY_S, now_s=NOW_S)
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o600
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []   # no temp left
    text = path.read_bytes()
    assert text.startswith(FILE_HEADER)
    until = text.decode().split(" until ")[1].strip()
    assert calendar.timegm(time.strptime(until, "%Y-%m-%dT%H:%M:%SZ")) == NOW_S + 3 * DAY_S
    keys = load_site_keys(path, create=False)
    assert keys == rotated.__class__(RAW_KEY, rotated.signing_root, RAW_KEY, NOW_S + 3 * DAY_S,
                                     str(path))
    assert keys.signing_root != RAW_KEY and len(keys.signing_root) == 32
    assert keys.site_id == old_ring.site_id          # same site: same person-id key

    # person keys unchanged: the store made before the rotation opens and finds the person
    store = SqliteStore(tmp_path / "beliefs.sqlite3", "ward3", keys)
    assert store.key_for("nurse-ingrid") == nurse == hmac.new(
        RAW_KEY, b"nurse-ingrid", hashlib.sha256).hexdigest()
    assert store.belief(nurse) == before
    store.close()

    ring = keys.key_ring()
    assert ring.current.key_id != old_ring.current.key_id
    assert decode_document(old_doc, ring, NOW_S + 3 * DAY_S)[0] == "outcome"   # in the window
    with pytest.raises(CoreInputError) as late:
        decode_document(old_doc, ring, NOW_S + 3 * DAY_S + 1)
    assert refusal_reason(late.value) == "expired_key"
    assert "give that robot the current site key file" in str(late.value)
    # a robot still on the old file refuses the new key, saying what to do
    new_doc = encode_document("outcome", StoredEvent("ward3/2", nurse, 11.0, Result.DECLINED,
                                                     0.2, 0.5), ring)
    with pytest.raises(CoreInputError) as old_robot:
        decode_document(new_doc, old_ring, NOW_S)
    assert refusal_reason(old_robot.value) == "unknown_key"
    assert "copy the current site key file" in str(old_robot.value)
    assert json.loads(new_doc)["key_id"] == ring.current.key_id


def test_a_second_rotation_inside_the_window_is_refused_unless_forced(tmp_path):
    path = write_site_key(tmp_path, RAW_KEY)
    first = rotate_signing_key(path, DAY_S, now_s=NOW_S)
    with pytest.raises(SiteKeyError, match="still accepted until"):
        rotate_signing_key(path, DAY_S, now_s=NOW_S + 10.0)
    assert load_site_keys(path, create=False) == first              # file untouched
    second = rotate_signing_key(path, DAY_S, now_s=NOW_S + 10.0, force=True)
    assert second.previous_signing_root == first.signing_root
    third = rotate_signing_key(path, DAY_S, now_s=NOW_S + 2 * DAY_S)   # window over: fine
    assert third.person_id_key == RAW_KEY


@pytest.mark.parametrize("body, words", [
    (b"person-ids 00\nsigning " + b"ab" * 32 + b"\n", "holds 1 bytes"),
    (b"person-ids " + b"ab" * 32 + b"\n", "no 'signing' line"),
    (b"person-ids " + b"ab" * 32 + b"\nsigning zz\n", "line 3: signing is not hex"),
    (b"person-ids " + b"ab" * 32 + b"\nsigning " + b"cd" * 32 + b"\nsigning " + b"ef" * 32,
     "line 4: 'signing' is unknown or repeated"),
    (b"person-ids " + b"ab" * 32 + b"\nsigning " + b"cd" * 32 + b"\nprevious-signing "
     + b"ef" * 32 + b" until tomorrow\n", "line 4: 'tomorrow' is not a UTC time"),
    (b"person-id " + b"ab" * 32 + b"\n", "line 2: 'person-id' is unknown"),
])
def test_a_damaged_text_key_file_is_refused_naming_the_line(body, words):
    with pytest.raises(SiteKeyError, match=words):
        parse_site_key_file(FILE_HEADER + body, "site_key")


def test_comments_and_blank_lines_are_allowed(tmp_path):
    body = (FILE_HEADER + b"# copied to every robot on 2026-03-01\n\nperson-ids "
            + RAW_KEY.hex().encode() + b"   # the stores' key\nsigning " + b"cd" * 32 + b"\n")
    keys = parse_site_key_file(body)
    assert keys.person_id_key == RAW_KEY and keys.site_id == key_fingerprint(RAW_KEY)[:16]
