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

"""The review's site-learning section.

Constants over time and calibration before and after, from a bag whose decisions span a change of
constants (a help session's real documents, written with the bag package), and `helpaware fit` on
that bag with its ask times.

Expected counts come from the documents and outcomes written here, counted in the test.
"""
import json

from helpaware_node import wire
from helpaware_node.bag import BagWriter
from helpaware_node.fit.bags import read_outcome_bags
from helpaware_node.review.report import build, summary_text
from learning_events import session_across_a_change
import pytest

LEARNED = {"prior_a": 0.8, "prior_b": 2.4, "k_busy": 3.0, "k_load": 1.2,
           "notice_probability": 0.7, "ask_memory_half_life_s": 5400.0}


@pytest.fixture(scope="module")
def bag(tmp_path_factory):
    docs, outcomes, _, _, _ = session_across_a_change(LEARNED, needs=60, change_at=25,
                                                      strangers=False)
    path = tmp_path_factory.mktemp("bags") / "across_change"
    with BagWriter(path) as w:
        for t, text in docs:
            w.write_string("/decision", int(t * 1e9), text)
        for t, rid, pid, result in outcomes:
            w.write_string("/outcome", int(t * 1e9),
                           wire.outcome_document(rid, pid, result, stamp_s=t))
    return str(path), docs, outcomes


def test_report_shows_constants_over_time_and_calibration_by_source(bag, tmp_path):
    path, docs, outcomes = bag
    summary = build(path, str(tmp_path / "review"))
    learned = summary["site_learning"]
    assert [(c["source"], c["revision"]) for c in learned["changes"]] == [
        ("parameter_file", 0), ("learned", 1)]
    assert {k: learned["changes"][1][k] for k in LEARNED} == LEARNED
    assert learned["changes"][0]["prior_a"] == 2.0
    # counted here: answered asks (helped, declined, no response) by the source of the
    # decision that asked
    source_of = {}
    for _, text in docs:
        d = json.loads(text)
        if d["action"] == "ask":
            source_of[d["request_id"]] = d["parameters"]["source"]["site_constants"]
    expected = {"parameter_file": 0, "learned": 0}
    for _, rid, _, result in outcomes:
        expected[source_of[rid]] += 1
    assert min(expected.values()) > 0
    for k, n in expected.items():
        assert learned["calibration"][k]["answered_asks"] == n
    page = (tmp_path / "review" / "report.html").read_text()
    assert "<h2>Site learning</h2>" in page and "Calibration before and after" in page
    assert page.count("data:image/png") >= 7           # the two site-learning figures too
    text = summary_text(summary, str(tmp_path / "review"))
    assert "site learning: revisions 1 in force" in text and "prior_a 2 -> 0.8" in text
    assert summary["replay"]["reproduced"] == summary["replay"]["needs"] == len(docs)


def test_fit_reads_ask_times_from_the_bag(bag):
    # each outcome's ask history comes from the asking decision's candidate row: as many
    # (outcome, earlier ask) pairs as those rows list, counted here from the documents
    path, docs, outcomes = bag
    data = read_outcome_bags([path])
    asked = {}
    for _, text in docs:
        d = json.loads(text)
        if d["action"] == "ask":
            row = next(c for c in d["candidates"] if c["person_id"] == d["person_id"])
            asked[d["request_id"]] = len(row["ask_times_s"])
    assert data.n_outcomes == len(outcomes)
    assert data.prior_asks.row.size == sum(asked[rid] for _, rid, _, _ in outcomes) > 0
