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

"""Signed fleet documents without ROS: key derivation, canonical encoding, HMAC, refusals.

Outside references: the RFC 5869 test vectors (test/data/rfc5869_hkdf_sha256.json) for the
key derivation; Python's hmac and hashlib for the MAC; struct for the hand-built canonical
bytes of one document, assembled from the format written in signing.py's docstring; and an
independent parser of the canonical bytes written here, whose round trip shows the encoding
is one-to-one (two different documents never encode the same).
"""
import hashlib
import hmac
import json
import math
import os
import struct

from helpaware_node.core import Result
from helpaware_node.core.model import CoreInputError
from helpaware_node.fleet_documents import (
    decode_document,
    encode_document,
    KINDS,
    OLD_FORMAT,
    PrivacyAct,
    refusal_reason,
)
from helpaware_node.signing import (
    BAD_SIGNATURE,
    canonical_bytes,
    CanonicalError,
    DOCUMENT_PREFIX,
    EXPIRED_KEY,
    hkdf_sha256,
    KeyRing,
    OTHER_SITE,
    Refused,
    SigningKey,
    UNKNOWN_KEY,
    UNSIGNED,
)
from helpaware_node.store import AskEvent, MemoryStore, person_key, SiteKeys, StoredEvent
from hypothesis import assume, given, settings, strategies as st
import pytest

DATA = os.path.join(os.path.dirname(__file__), "data", "rfc5869_hkdf_sha256.json")
SITE_KEY = bytes(range(100, 132))
KEYS = SiteKeys.single(SITE_KEY).key_ring()
NOW_S = 1_764_632_000.0
NURSE = person_key(SITE_KEY, "nurse-ingrid")


def outcome() -> StoredEvent:
    return StoredEvent("ward3/17", NURSE, 1_764_631_000.5, Result.DECLINED, 0.3, 0.12, "door")


def act(action: str) -> PrivacyAct:
    return PrivacyAct.new(action, NURSE, "console@desk", issued_s=NOW_S)


def ask() -> AskEvent:
    return AskEvent("ward3/16", NURSE, 1_764_630_990.0, "door", "door-3F-0231")


VALID = {"outcome": outcome(), "ask": ask(), "forget": act("forget"), "opt_out": act("opt_out")}


# ---------------------------------------------------------------------------- derivation
def test_hkdf_matches_the_rfc_5869_test_vectors():
    """RFC 5869, Appendix A, test cases 1-3 (SHA-256)."""
    cases = json.load(open(DATA))["cases"]
    assert len(cases) == 3
    for c in cases:
        got = hkdf_sha256(bytes.fromhex(c["ikm"]), bytes.fromhex(c["info"]), c["length"],
                          bytes.fromhex(c["salt"]))
        assert got.hex() == c["okm"], c["name"]


def test_the_signing_key_is_not_the_key_that_hashes_person_ids():
    k = SigningKey.derive(SITE_KEY)
    assert k.key != SITE_KEY and len(k.key) == 32
    # HKDF-SHA256 written out with hmac (RFC 5869 section 2): extract with a zero salt, expand
    prk = hmac.new(bytes(32), SITE_KEY, hashlib.sha256).digest()
    t1 = hmac.new(prk, b"helpaware fleet signing key v2" + b"\x01", hashlib.sha256).digest()
    assert k.key == t1
    # a person key made with the signing key is not the stored person key
    assert hmac.new(k.key, b"nurse-ingrid", hashlib.sha256).hexdigest() != NURSE
    assert k.key_id not in k.key.hex() and len(k.key_id) == 16
    assert SigningKey.derive(bytes(32)).key_id != k.key_id


def test_the_signature_is_the_hmac_sha256_of_the_canonical_bytes():
    """Outside reference: Python's hmac and hashlib over the bytes of the documented format."""
    doc = KEYS.sign({"v": 2, "kind": "x", "n": 1})
    assert set(doc) == {"v", "kind", "n", "site", "key_id", "sig"}
    body = {k: v for k, v in doc.items() if k != "sig"}
    expected = hmac.new(SigningKey.derive(SITE_KEY).key, canonical_bytes(body),
                        hashlib.sha256).hexdigest()
    assert doc["sig"] == expected
    assert canonical_bytes(doc) == canonical_bytes(body)        # sig is never covered


def test_canonical_bytes_of_one_document_assembled_by_hand():
    """The format in signing.py's docstring.

    Built with struct (not with the encoder).
    """
    u32 = lambda n: struct.pack(">I", n)                       # noqa: E731
    s = lambda t: b"s" + u32(len(t.encode())) + t.encode()     # noqa: E731
    doc = {"b": [True, None, -0.0], "a": "é", "c": {"z": 1, "y": False}, "sig": "ignored"}
    expected = (DOCUMENT_PREFIX + b"o" + u32(3)
                + s("a") + s("é")
                + s("b") + b"l" + u32(3) + b"T" + b"n" + b"d" + struct.pack(">d", 0.0)
                + s("c") + b"o" + u32(2) + s("y") + b"F" + s("z") + b"d" + struct.pack(">d", 1.0))
    assert canonical_bytes(doc) == expected


# ---------------------------------------------------------------------------- one-to-one
def parse_canonical(data: bytes):
    """Return an independent reader of the canonical format; returns (value, bytes used)."""
    def value(i):
        tag = data[i:i + 1]
        if tag == b"n":
            return None, i + 1
        if tag in (b"T", b"F"):
            return tag == b"T", i + 1
        if tag == b"d":
            return struct.unpack(">d", data[i + 1:i + 9])[0], i + 9
        if tag == b"s":
            n = struct.unpack(">I", data[i + 1:i + 5])[0]
            return data[i + 5:i + 5 + n].decode("utf-8"), i + 5 + n
        if tag in (b"l", b"o"):
            n = struct.unpack(">I", data[i + 1:i + 5])[0]
            i += 5
            items = []
            for _ in range(n):
                if tag == b"o":
                    name, i = value(i)
                    v, i = value(i)
                    items.append((name, v))
                else:
                    v, i = value(i)
                    items.append(v)
            if tag == b"o":
                names = [k.encode() for k, _ in items]
                assert names == sorted(names) and len(set(names)) == len(names)
                return dict(items), i
            return items, i
        raise AssertionError(f"unknown tag {tag!r} at {i}")
    assert data.startswith(DOCUMENT_PREFIX)
    v, end = value(len(DOCUMENT_PREFIX))
    assert end == len(data), "trailing bytes"
    return v


def as_json_value(v):
    """Return the value under JSON's own equality: one number type, -0 is 0, no top sig."""
    if isinstance(v, bool) or v is None or isinstance(v, str):
        return v
    if isinstance(v, (int, float)):
        return float(v) + 0.0
    if isinstance(v, list):
        return [as_json_value(x) for x in v]
    return {k: as_json_value(x) for k, x in v.items()}


EXACT_INTS = st.integers(-(2 ** 53), 2 ** 53)
scalars = st.one_of(st.none(), st.booleans(), EXACT_INTS,
                    st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=8))
json_values = st.recursive(scalars, lambda kids: st.one_of(
    st.lists(kids, max_size=4), st.dictionaries(st.text(max_size=6), kids, max_size=4)),
    max_leaves=12)
documents = st.dictionaries(st.text(max_size=6).filter(lambda k: k != "sig"), json_values,
                            max_size=6)


@settings(max_examples=400)
@given(documents)
def test_the_canonical_bytes_read_back_to_the_same_document(doc):
    """A left inverse exists, so the encoding is one-to-one."""
    assert parse_canonical(canonical_bytes(doc)) == as_json_value(doc)


@settings(max_examples=400)
@given(documents, documents)
def test_two_different_documents_never_encode_the_same(a, b):
    assume(as_json_value(a) != as_json_value(b))
    assert canonical_bytes(a) != canonical_bytes(b)


@pytest.mark.parametrize("a, b", [
    ({"a": "bc"}, {"ab": "c"}),                      # where a name ends and a value begins
    ({"a": ["b", "c"]}, {"a": ["bc"]}),
    ({"a": "", "b": ""}, {"a": "\u0000b"}),
    ({"a": 1}, {"a": "1"}), ({"a": True}, {"a": 1}), ({"a": None}, {"a": "n"}),
    ({"a": [[]]}, {"a": [[], []]}), ({"a": {}}, {"a": []}),
])
def test_near_collisions_encode_apart(a, b):
    assert canonical_bytes(a) != canonical_bytes(b)


def test_json_numbers_are_numbers_by_value():
    """JSON (RFC 8259) has one number type: a peer that writes 100 for 100.0 signs the same."""
    assert canonical_bytes({"t": 100}) == canonical_bytes({"t": 100.0})
    assert canonical_bytes({"t": -0.0}) == canonical_bytes({"t": 0})


@pytest.mark.parametrize("value, field", [
    (math.nan, "t"), (math.inf, "t"), (10 ** 400, "t"), (2 ** 53 + 1, "t"),
    ("\ud800", "t"), ([[[[[[[[[[[[[[[[[[1]]]]]]]]]]]]]]]]]], "t"),
])
def test_values_no_encoding_holds_are_refused_by_field(value, field):
    with pytest.raises(CanonicalError, match=rf"^field '{field}[\[']"):
        canonical_bytes({field: value})


# ---------------------------------------------------------------------------- documents
@settings(max_examples=200)
@given(st.sampled_from([f"r{i}" for i in range(3)]), st.integers(1, 10 ** 9),
       st.floats(0, 1e10), st.sampled_from(list(Result)), st.floats(0, 1), st.floats(0, 50),
       st.text(max_size=20).filter(lambda t: t.isprintable()))
def test_outcome_documents_round_trip(robot, seq, t, result, x, load, kind):
    e = StoredEvent(f"{robot}/{seq}", NURSE, t, result, x, load, kind)
    assert decode_document(encode_document("outcome", e, KEYS), KEYS, NOW_S) == ("outcome", e)


def test_privacy_acts_round_trip_and_carry_their_request():
    for action in ("forget", "opt_out"):
        a = VALID[action]
        assert decode_document(encode_document(action, a, KEYS), KEYS, NOW_S) == (action, a)
        assert a.request_id == a.act_id and a.identity == a.act_id      # a request of its own
        answer = PrivacyAct.new(action, NURSE, "ward3", request_id=a.act_id)
        assert answer.identity == a.act_id != answer.act_id


def test_a_raw_id_is_never_signed_or_taken():
    with pytest.raises(CoreInputError, match="person_key"):
        encode_document("outcome", StoredEvent("r1/1", "nurse-ingrid", 1.0, Result.HELPED,
                                               0.1, 0.0), KEYS)
    doc = KEYS.sign({**json.loads(encode_document("outcome", outcome(), KEYS)),
                     "person_key": "nurse-ingrid"})               # signed by a buggy peer
    with pytest.raises(CoreInputError, match="person_key"):
        decode_document(json.dumps(doc), KEYS, NOW_S)


def signed(kind: str) -> dict:
    return json.loads(encode_document(kind, VALID[kind], KEYS))


def refusal(text: str, keys: KeyRing = KEYS, now_s: float = NOW_S) -> str:
    with pytest.raises(CoreInputError) as info:
        decode_document(text, keys, now_s)
    return refusal_reason(info.value)


# values of each JSON type different from a given one (the tamper below keeps the type)
def other_value(draw, value):
    if isinstance(value, bool):
        return not value
    if isinstance(value, (int, float)):
        return draw(st.floats(-1e12, 1e12).filter(lambda x: x != value))
    if isinstance(value, str):
        return draw(st.text(min_size=0, max_size=70).filter(lambda t: t != value))
    raise AssertionError(value)


EXPECTED_FOR_FIELD = {"site": OTHER_SITE, "key_id": UNKNOWN_KEY}


@settings(max_examples=150)
@given(st.sampled_from(sorted(KINDS)), st.data())
def test_a_tampered_field_of_a_valid_document_is_refused(kind, data):
    """Every field of every kind, the signature fields and v included.

    Any other value (of the same JSON type) and the document is refused.
    """
    doc = signed(kind)
    for name in sorted(doc):
        changed = dict(doc)
        changed[name] = other_value(data.draw, doc[name])
        reason = refusal(json.dumps(changed))
        if name == "v":
            assert reason in ("malformed", OLD_FORMAT)
        elif name in ("site", "key_id") and isinstance(changed[name], str) and len(
                changed[name]) == 16 and all(c in "0123456789abcdef" for c in changed[name]):
            assert reason == EXPECTED_FOR_FIELD[name], (name, changed[name])
        else:
            assert reason == BAD_SIGNATURE, (name, changed[name], reason)


def smallest_change(value):
    """One bit of the last character of a text, the next double of a number."""
    if isinstance(value, str):
        return value[:-1] + chr(ord(value[-1]) ^ 1) if value else "x"
    return math.nextafter(float(value), math.inf)


def test_each_field_changed_by_the_smallest_step_is_refused_as_a_bad_signature():
    """A loop over every field of every kind.

    The smallest change a damaged copy could carry.
    """
    tried = 0
    for kind in KINDS:
        doc = signed(kind)
        for name in sorted(set(doc) - {"v", "site", "key_id"}):
            changed = {**doc, name: smallest_change(doc[name])}
            assert changed != doc
            assert refusal(json.dumps(changed)) == BAD_SIGNATURE, (kind, name)
            tried += 1
        added = {**doc, "extra": 1}
        assert refusal(json.dumps(added)) == BAD_SIGNATURE
        for name in set(doc) - {"v", "sig", "site", "key_id"}:
            dropped = {k: v for k, v in doc.items() if k != name}
            assert refusal(json.dumps(dropped)) == BAD_SIGNATURE, (kind, name)
    assert tried == sum(len(k.fields) + 2 for k in KINDS.values())   # own fields, kind, sig


def test_unsigned_other_site_unknown_key_and_old_format_are_told_apart():
    doc = signed("outcome")
    assert refusal(json.dumps({k: v for k, v in doc.items() if k != "sig"})) == UNSIGNED
    other = SiteKeys.single(bytes(32)).key_ring()
    assert refusal(json.dumps(doc), other) == OTHER_SITE
    # same site (same person-id key), another signing root: a key this robot does not hold
    rotated = SiteKeys(SITE_KEY, os.urandom(32)).key_ring()
    assert refusal(json.dumps(doc), rotated) == UNKNOWN_KEY
    old = {"v": 1, "kind": "outcome", "event_id": "ward3/17", "person_key": NURSE,
           "time_s": 1.0, "result": "helped", "busyness": 0.1, "ask_load": 0.0}
    with pytest.raises(Refused) as info:
        decode_document(json.dumps(old), KEYS, NOW_S)
    assert info.value.reason == OLD_FORMAT
    assert "v=1, the unsigned format" in str(info.value) and "'ward3'" in str(info.value)
    assert "update helpaware_node" in str(info.value)


def test_the_previous_key_is_taken_within_its_window_only():
    old_root, new_root = SITE_KEY, os.urandom(32)
    old_ring = SiteKeys.single(old_root).key_ring()
    text = encode_document("outcome", outcome(), old_ring)
    ring = SiteKeys(SITE_KEY, new_root, old_root, previous_until_s=NOW_S).key_ring()
    assert decode_document(text, ring, NOW_S)[1] == outcome()           # last second of it
    assert refusal(text, ring, NOW_S + 1.0) == EXPIRED_KEY
    assert decode_document(encode_document("outcome", outcome(), ring), ring, NOW_S + 1e6)
    assert refusal(encode_document("outcome", outcome(), ring), old_ring) == UNKNOWN_KEY


def test_a_forged_signature_without_the_key_is_refused():
    doc = signed("opt_out")
    doc["sig"] = hmac.new(b"guessed" * 5, canonical_bytes(doc), hashlib.sha256).hexdigest()
    assert refusal(json.dumps(doc)) == BAD_SIGNATURE
    doc["sig"] = "NOT HEX"
    assert refusal(json.dumps(doc)) == BAD_SIGNATURE


def test_duplicate_names_are_refused_before_any_signature_check():
    text = encode_document("outcome", outcome(), KEYS)
    twice = text[:-1] + ',"time_s":5.0}'
    with pytest.raises(CoreInputError, match="duplicate field 'time_s'"):
        decode_document(twice, KEYS, NOW_S)


def test_a_memory_store_signs_for_a_site_of_its_own():
    a, b = MemoryStore(), MemoryStore()
    assert a.site_keys.site_id != b.site_keys.site_id
    text = encode_document("outcome", outcome(), a.site_keys.key_ring())
    assert refusal(text, b.site_keys.key_ring()) == OTHER_SITE


def test_a_refusal_in_a_field_named_empty_names_that_field():
    """A field named "" is shown as '""' in the reason, never as the whole document."""
    for doc, head in (({"": 10**30 + 1}, "field '\"\"'"),
                      ({"a": {"": float("nan")}}, "field 'a.\"\"'"),
                      ({"b": [{"": "\ud800"}]}, "field 'b[0].\"\"'")):
        with pytest.raises(CanonicalError) as err:
            canonical_bytes(doc)
        assert str(err.value).startswith(head + ":"), str(err.value)
