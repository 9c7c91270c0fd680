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

"""The in-memory store: idempotent append, fold equals the core fold, forget removes all."""
from helpaware_node.core import fold_events, Result, SiteModel
from helpaware_node.store.base import MemoryStore, person_key, StoredEvent


def test_append_is_idempotent_and_belief_is_the_fold():
    store = MemoryStore(site_key=b"k" * 32)
    key = store.key_for("nurse-a")
    assert key == person_key(b"k" * 32, "nurse-a") and "nurse-a" not in key
    evs = [StoredEvent(f"r1/{i}", key, 10.0 * i, r, 0.2, 0.0)
           for i, r in enumerate([Result.HELPED, Result.DECLINED, Result.HELPED])]
    assert store.extend(evs) == 3
    assert store.extend(evs) == 0
    model = SiteModel()
    assert store.belief(key, model) == fold_events([e.to_outcome() for e in evs], model)
    store.opt_out(key)
    assert store.is_opted_out(key)
    assert store.forget(key) == 3
    assert store.keys() == [] and not store.is_opted_out(key)
