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

"""Fleet convergence: any permutation and duplication of deliveries gives identical beliefs."""
from helpaware_node.core import fold_events, Result, SiteModel
from helpaware_node.core.model import CoreInputError
from helpaware_node.fleet_documents import decode_document, encode_document, PrivacyAct
from helpaware_node.ros.fleet import merge
from helpaware_node.store import AskEvent, MemoryStore, SiteKeys, SqliteStore, StoredEvent
from hypothesis import given, settings, strategies as st
import pytest

MODEL = SiteModel(evidence_half_life_s=3600.0)
SITE_KEY = b"f" * 32
KEYS = SiteKeys.single(SITE_KEY).key_ring()
PEOPLE = [MemoryStore(site_key=SITE_KEY).key_for(f"nurse-{i}") for i in range(3)]


def encode_event(e: StoredEvent) -> str:
    return encode_document("outcome", e, KEYS)


def encode_forget(key: str, sender: str) -> str:
    return encode_document("forget", PrivacyAct.new("forget", key, sender), KEYS)


events_st = st.lists(
    st.tuples(st.sampled_from(["r1", "r2", "r3"]), st.integers(0, 2),
              st.floats(0, 2000, allow_nan=False).map(lambda t: round(t, 1)),  # ties happen
              st.sampled_from(list(Result)), st.floats(0, 1)),
    min_size=1, max_size=20)


def build(rows):
    return [StoredEvent(f"{r}/{i}", PEOPLE[p], t, res, x, 0.5)
            for i, (r, p, t, res, x) in enumerate(rows)]


@settings(max_examples=40)
@given(events_st, st.randoms(use_true_random=False), st.randoms(use_true_random=False))
def test_any_delivery_order_and_duplication_gives_the_same_beliefs(tmp_path_factory, rows,
                                                                   rng1, rng2):
    events = build(rows)
    messages = [encode_event(e) for e in events]
    beliefs = []
    d = tmp_path_factory.mktemp("fleet")
    for n, rng in enumerate((rng1, rng2)):
        delivery = messages + [rng.choice(messages) for _ in range(rng.randint(0, 10))]
        rng.shuffle(delivery)
        store = SqliteStore(d / f"robot{n}.sqlite3", f"robot{n}", SITE_KEY, model=MODEL)
        merged = [e for m in delivery for e in merge(store, m, KEYS)]
        assert sorted(e.event_id for e in merged) == sorted(e.event_id for e in events)
        beliefs.append({k: store.belief(k) for k in store.keys()})
        store.close()
    assert beliefs[0] == beliefs[1]
    # and both equal the fold of the whole log in (time, event id) order (core reference)
    for k, b in beliefs[0].items():
        assert b == fold_events([e.to_outcome() for e in events if e.person_key == k], MODEL)


def test_messages_round_trip_and_refuse_raw_ids():
    e = StoredEvent("r1/7", PEOPLE[0], 12.5, Result.DECLINED, 0.25, 1.5, "elevator")
    assert decode_document(encode_event(e), KEYS) == ("outcome", e)
    kind, act = decode_document(encode_forget(PEOPLE[1], "r2"), KEYS)
    assert (kind, act.person_key, act.sender) == ("forget", PEOPLE[1], "r2")
    with pytest.raises(CoreInputError, match="person_key"):
        encode_event(StoredEvent("r1/8", "nurse-ingrid", 1.0, Result.HELPED, 0.1, 0.0))
    bad = encode_event(e).replace(PEOPLE[0], "nurse-ingrid")
    with pytest.raises(CoreInputError, match="sig does not match"):    # changed on the way
        decode_document(bad, KEYS)
    with pytest.raises(CoreInputError, match="JSON"):
        decode_document("{not json", KEYS)


def test_forget_message_erases_and_blocks_replayed_copies(tmp_path):
    store = SqliteStore(tmp_path / "b.sqlite3", "r1", SITE_KEY, model=MODEL)
    e = StoredEvent("r2/1", PEOPLE[0], 1.0, Result.HELPED, 0.1, 0.0)
    forgotten = set()
    assert merge(store, encode_event(e), KEYS, forgotten) == [e]
    assert merge(store, encode_forget(PEOPLE[0], "r2"), KEYS, forgotten) == []
    assert store.keys() == []
    assert merge(store, encode_event(e), KEYS, forgotten) == []    # a peer's older copy replayed
    assert store.keys() == []


asks_st = st.lists(st.tuples(st.sampled_from(["r1", "r2"]), st.integers(0, 2),
                             st.floats(0, 2000, allow_nan=False)), min_size=1, max_size=15)


@settings(max_examples=30)
@given(asks_st, st.randoms(use_true_random=False))
def test_asks_merge_idempotently_in_any_order(tmp_path_factory, rows, rng):
    """Asks from the fleet: any order and duplication store each ask once.

    a person's asks read back are the same set on every robot, in (time, event id) order.
    """
    asks = [AskEvent(f"{r}/{i}", PEOPLE[p], t, "door", f"need-{i}")
            for i, (r, p, t) in enumerate(rows)]
    messages = [encode_document("ask", a, KEYS) for a in asks]
    delivery = messages + [rng.choice(messages) for _ in range(rng.randint(0, 8))]
    rng.shuffle(delivery)
    store = SqliteStore(tmp_path_factory.mktemp("asks") / "b.sqlite3", "r3", SITE_KEY)
    merged = [a for m in delivery for a in merge(store, m, KEYS)]
    assert sorted(a.event_id for a in merged) == sorted(a.event_id for a in asks)
    for key in PEOPLE:
        mine = sorted((a for a in asks if a.person_key == key),
                      key=lambda a: (a.time_s, a.event_id))
        assert store.asks(person_key=key) == mine
    store.close()


def test_ask_documents_round_trip_and_refuse_bad_fields_naming_them():
    import json
    a = AskEvent("r1/9", PEOPLE[2], 30.0, "door", "need-3")
    assert decode_document(encode_document("ask", a, KEYS), KEYS) == ("ask", a)
    with pytest.raises(CoreInputError, match="person_key"):       # a raw id never travels
        encode_document("ask", AskEvent("r1/9", "nurse-ingrid", 30.0), KEYS)
    good = {"v": 2, "kind": "ask", "event_id": "r1/9", "person_key": PEOPLE[2], "time_s": 30.0,
            "request_kind": "door", "request_id": "need-3"}
    for field, bad in [("person_key", "nurse-ingrid"), ("event_id", "r19"),
                       ("time_s", "soon"), ("time_s", True), ("time_s", 1e16),
                       ("request_id", "x" * 200), ("request_id", 7), ("request_kind", None)]:
        doc = dict(good, **{field: bad})       # signed as a peer would sign it: the fields
        text = json.dumps(KEYS.sign(doc), sort_keys=True)     # are what is refused
        with pytest.raises(CoreInputError, match=field):
            decode_document(text, KEYS)
    missing = {k: v for k, v in good.items() if k != "time_s"}
    with pytest.raises(CoreInputError, match="time_s"):
        decode_document(json.dumps(KEYS.sign(missing), sort_keys=True), KEYS)
