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

"""`fit` from bags: outcomes joined to the decisions that asked, via the review's bag loader.

Skipped while the review's loader (review/data.py and its documents module) is not importable.
The check: every answered ask in the sample bag is read, with the busyness and ask load the
decision's candidate row recorded (the same numbers the core used for p).
"""
from helpaware_node.fit.data import HELPED
import pytest

review_data = pytest.importorskip("helpaware_node.review.data", exc_type=ImportError)
review_sample = pytest.importorskip("helpaware_node.review.sample", exc_type=ImportError)


def test_outcomes_from_a_sample_bag(tmp_path):
    from helpaware_node.fit.bags import read_outcome_bags
    bag = str(tmp_path / "shift")
    counts = review_sample.write_sample_bag(bag, needs=60, people=8)
    data = read_outcome_bags([bag])
    loaded = review_data.load(bag)
    answered = [o for o in loaded.outcomes if o.result != "could_not_ask"]
    assert data.n_outcomes == len(answered) and data.n_outcomes > 0
    assert counts.outcomes >= data.n_outcomes
    assert ((data.busyness >= 0) & (data.busyness <= 1)).all() and (data.load >= 0).all()
    assert int((data.result == HELPED).sum()) == sum(o.result == "helped" for o in answered)
