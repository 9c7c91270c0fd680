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
