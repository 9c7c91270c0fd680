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

"""Counterfactual replay: recorded parameters reproduce every decision; others are estimates."""
from helpaware_node.core.model import DecisionConfig, SiteModel
from helpaware_node.node_param_file import load_params, ParamFileError
from helpaware_node.review import data as review_data, replay as review_replay, report as review
from helpaware_node.review.sample import write_sample_bag
import pytest

CONFIG = DecisionConfig(max_asks_per_hour=3, min_reask_interval_s=1200.0)
MODEL = SiteModel(k_busy=1.5, evidence_half_life_s=86400.0)


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    bag = tmp_path_factory.mktemp("replay") / "bag"
    write_sample_bag(str(bag), needs=80, people=8, people_per_need=4, seed=5, model=MODEL,
                     config=CONFIG)
    return review_data.load(str(bag))


def test_recorded_parameters_reproduce_every_decision_exactly(data):
    out = review_replay.replay(data)
    assert out["needs"] == len(data.decisions) == 80 and out["skipped"] == 0
    assert out["mismatches"] == []
    # and every number of the rationale, bit for bit
    for row in data.decisions:
        model, config = review_replay.rw.recorded_params(row.document)
        again = review_replay.replay_one(row.document, model, config)
        assert again.rationale() == row.document["rationale"]
        assert again.evaluation.params_hash == row.params_hash


def test_a_limit_of_zero_asks_changes_every_ask(data, tmp_path):
    f = tmp_path / "never.yaml"
    f.write_text("/**/helpaware_decider:\n  ros__parameters:\n    max_asks_per_hour: 0\n")
    other = load_params(str(f), MODEL, CONFIG)
    assert other.config.max_asks_per_hour == 0 and other.model == MODEL   # the rest kept
    out = review_replay.replay(data, other.model, other.config, str(f))
    asks = sum(1 for d in data.decisions if d.action == "ask")
    assert out["changed"] == asks > 0
    rec, alt = out["totals"]
    assert rec["asks"] == asks and alt["asks"] == 0
    assert alt["expected_helps"] == 0.0 and alt["expected_interruption_s"] == 0.0
    # continuing at every need loses exactly the sum of the recorded continue costs
    assert alt["expected_time_lost_s"] == pytest.approx(
        sum(d.document["continue_cost_s"] for d in data.decisions))
    # expected helps under the recorded set: the sum of p of the people asked
    assert rec["expected_helps"] == pytest.approx(sum(d.p for d in data.decisions if d.p))


def test_review_cli_writes_replay_columns(tmp_path):
    bag = tmp_path / "bag"
    write_sample_bag(str(bag), needs=12)
    f = tmp_path / "cheap.yaml"
    f.write_text("helpaware_decider:\n  ros__parameters:\n    interruption_weight_s: 0.0\n"
                 "    continue_cost_s.door: 600.0\n    store_path: ''\n")
    summary = review.build(str(bag), str(tmp_path / "out"), str(f))
    rp = summary["replay"]
    assert rp["reproduced"] == rp["needs"] == 12
    assert rp["parameters_applied"] == {"interruption_weight_s": 0.0,
                                        "continue_cost_s.door": 600.0, "store_path": ""}
    head = (tmp_path / "out" / "decisions.csv").read_text().splitlines()[0]
    assert head.endswith("replay_recorded,replay_other")
    assert "model-based estimates" in (tmp_path / "out" / "report.html").read_text()


def test_bad_parameter_file_names_file_and_field(tmp_path):
    f = tmp_path / "bad.yaml"
    f.write_text("n:\n  ros__parameters:\n    k_busy: -1.0\n")
    with pytest.raises(ParamFileError, match=r"bad.yaml: k_busy: -1.0 is outside"):
        load_params(str(f))
    g = tmp_path / "none.yaml"
    g.write_text("just: text\n")
    with pytest.raises(ParamFileError, match="none.yaml: no 'ros__parameters'"):
        load_params(str(g))


def test_a_decision_the_node_forced_to_continue_replays_as_forced():
    from helpaware_node import wire
    from helpaware_node.core import candidate_from_record, decide, HelpNeed, PersonRecord
    model, config = SiteModel(), DecisionConfig()
    need = HelpNeed("need-9", "door", 50.0)
    cands = [candidate_from_record("k1", PersonRecord.new(model), 50.0, model, 1.0, 50.0, 0.0)]
    assert decide(need, cands, 50.0, (), model, config).action == "ask"
    forced = decide(need, cands, 50.0, (), model, config, chooser=lambda ev: None,
                    policy="need_ask_limit")
    doc = wire.decision_to_document(forced, (), model, config)
    again = review_replay.replay_one(doc, model, config)
    assert (again.action, again.policy) == ("continue", "need_ask_limit")
    assert again.rationale() == doc["rationale"]
