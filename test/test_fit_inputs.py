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

"""fit: reading outcome CSV files, degenerate data, the `fit` command and its parameter file.

Outside sources: the core's own ask_load (DESIGN.md section 3 formula), yaml.safe_load, and
core.model.SiteModel's own validation for the written file.
"""
import math

from helpaware_node.cli import main as cli_main
from helpaware_node.core.context import ask_load
from helpaware_node.core.model import SiteModel
from helpaware_node.fit.data import (
    DECLINED,
    FitInputError,
    from_arrays,
    HELPED,
    NO_RESPONSE,
    read_outcome_csv,
)
from helpaware_node.fit.heldout import calibration_table, kfold, log_loss
from helpaware_node.fit.paramfile import DEFAULT_NODE_NAME, FITTED_NAMES, read_param_file
from helpaware_node.fit.simulate_outcomes import simulate
from helpaware_node.fit.site_fit import fit_site
from helpaware_node.fit.site_likelihood import SiteParams
import numpy as np
import pytest
import yaml

HEADER = "event_id,person_key,time_s,busyness,ask_load,result,request_kind\n"
NAMES = {HELPED: "helped", DECLINED: "declined", NO_RESPONSE: "no_response"}


def write_csv(path, data, ask_load_column=True):
    with open(path, "w") as fh:
        fh.write("# store export\n")
        fh.write(HEADER if ask_load_column else HEADER.replace("ask_load,", ""))
        for i in range(data.n_outcomes):
            load = f"{data.load[i]:.6f}," if ask_load_column else ""
            fh.write(f"r1-{i},{data.person_keys[data.person[i]]},{100.0 * i},"
                     f"{data.busyness[i]:.6f},{load}{NAMES[int(data.result[i])]},door\n")
    return str(path)


def test_csv_reader_skips_could_not_ask_and_names_bad_lines(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text(HEADER + "e1,k1,10,0.2,0.0,helped,door\n"
                 "e2,k1,20,0.3,1.0,could_not_ask,door\n"
                 "e3,k2,30,0.5,0.5,declined,door\n")
    d = read_outcome_csv([str(p)])
    assert d.n_outcomes == 2 and d.person_keys == ("k1", "k2")
    bad = tmp_path / "bad.csv"
    bad.write_text(HEADER + "e1,k1,10,0.2,0.0,helped,door\ne2,k1,20,1.7,0.0,helped,door\n")
    with pytest.raises(FitInputError, match=r"bad\.csv:3: busyness"):
        read_outcome_csv([str(bad)])
    bad.write_text(HEADER + "e1,k1,10,0.2,0.0,maybe,door\n")
    with pytest.raises(FitInputError, match=r"bad\.csv:2: result"):
        read_outcome_csv([str(bad)])
    bad.write_text(HEADER + "e1,k1,ten,0.2,0.0,helped,door\n")
    with pytest.raises(FitInputError, match=r"bad\.csv:2: time_s 'ten'"):
        read_outcome_csv([str(bad)])
    bad.write_text("event_id,person_key,result\n")
    with pytest.raises(FitInputError, match="missing column"):
        read_outcome_csv([str(bad)])


def test_csv_without_ask_load_rebuilds_it_from_ask_times(tmp_path):
    p = tmp_path / "times.csv"
    p.write_text("event_id,person_key,time_s,busyness,result,request_kind\n"
                 "e1,k1,0,0.2,declined,door\ne2,k1,600,0.2,helped,door\n"
                 "e0,k1,300,0.1,could_not_ask,door\ne3,k1,1800,0.4,declined,door\n")
    d = read_outcome_csv([str(p)], ask_memory_half_life_s=900.0)
    # core.context.ask_load over the earlier answered asks (the could_not_ask one never reached)
    expect = [0.0, ask_load([0.0], 600.0, 900.0), ask_load([0.0, 600.0], 1800.0, 900.0)]
    assert np.allclose(d.load, expect)


def test_degenerate_data_messages():
    zeros = np.zeros(20)
    with pytest.raises(FitInputError, match="no declines or no-responses"):
        fit_site(from_arrays([f"p{i % 4}" for i in range(20)], zeros, zeros, [HELPED] * 20))
    with pytest.raises(FitInputError, match="no helped asks"):
        fit_site(from_arrays([f"p{i % 4}" for i in range(20)], zeros, zeros, [DECLINED] * 20))
    with pytest.raises(FitInputError, match="too little data"):
        fit_site(from_arrays(["p"] * 3, zeros[:3], zeros[:3], [HELPED, DECLINED, HELPED]))
    # busyness varies, ask load never does: k_load fixed at 0 with a message
    truth = SiteParams(2.0, 3.0, 1.5, 0.0, 0.6, 0.7)
    d = simulate(truth, 80, 6, seed=3, load_scale=0.0)
    fit = fit_site(d, standard_errors=False)
    assert fit.params.k_load == 0.0 and "k_load" in fit.fixed and "k_busy" in fit.free
    assert any("ask load does not vary" in m for m in fit.messages)
    # a single person: fitted, with a note that the spread across people is not identified
    one = simulate(truth, 1, 40, seed=4)
    fit1 = fit_site(one, standard_errors=False)
    assert any("single person" in m for m in fit1.messages)
    # every group helps exactly 5 times in 10 (less spread than binomial): the Beta
    # concentration runs to its bound, with a warning that the node would barely learn
    from helpaware_node.fit.data import from_group_counts
    flat = fit_site(from_group_counts([5] * 20, [10] * 20), standard_errors=False)
    assert flat.params.prior_a + flat.params.prior_b > 1000
    prior_mean = flat.params.prior_a / (flat.params.prior_a + flat.params.prior_b)
    assert prior_mean == pytest.approx(0.5, abs=1e-3)
    assert any("no detectable spread" in m for m in flat.messages)
    # no no-response rows: notice probability kept at the given value, with a message
    d2 = from_arrays([f"p{i % 5}" for i in range(30)], np.linspace(0, 1, 30), zeros[:1].repeat(30),
                     [HELPED, DECLINED, DECLINED] * 10)
    fit2 = fit_site(d2, notice_probability=0.65, standard_errors=False)
    assert fit2.params.notice_probability == 0.65
    assert any("notice_probability cannot be estimated" in m for m in fit2.messages)


def test_heldout_log_loss_and_calibration():
    d = simulate(SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7), 60, 6, seed=9)
    held = kfold(d, folds=3, seed=1)
    base = held.base_rate
    # a constant prediction at the base rate is the floor a useful model should beat
    const = log_loss(np.full(d.n_outcomes, base), (d.result == HELPED).astype(float))
    assert held.site_sequential < const and held.glmm_sequential < const
    assert sum(row[2] for row in held.calibration) == d.n_outcomes
    p = np.array([0.05, 0.15, 0.95])
    assert [r[2] for r in calibration_table(p, np.array([0, 1, 1.0]))] == [1, 1, 1]
    assert log_loss(np.array([0.5]), np.array([1.0])) == pytest.approx(math.log(2))


def test_fit_command_writes_a_parameter_file_the_model_loads(tmp_path, capsys):
    d = simulate(SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7), 80, 8, seed=21)
    csv_path = write_csv(tmp_path / "outcomes.csv", d)
    out = tmp_path / "tuned.yaml"
    assert cli_main(["fit", csv_path, "--out", str(out), "--folds", "2"]) == 0
    text = out.read_text()
    assert "outcomes.csv" in text and "Log marginal likelihood" in text   # comments name both
    doc = yaml.safe_load(text)
    params = doc["/**/" + DEFAULT_NODE_NAME]["ros__parameters"]
    assert set(params) == set(FITTED_NAMES)
    assert all(isinstance(v, float) for v in params.values())          # 1.0, never 1
    model = SiteModel(**params)                                         # SiteModel validation
    assert model.k_busy > 0.5
    assert read_param_file(str(out)) == params
    printed = capsys.readouterr().out
    assert "held-out log loss" in printed and "GLMM" in printed
    # a bad row: exit code 2 and the file and line named on stderr
    bad = tmp_path / "bad.csv"
    bad.write_text(HEADER + "e1,k1,10,0.2,0.0,helped,door\ne2,k1,20,0.2,-1,declined,door\n")
    assert cli_main(["fit", str(bad), "--out", str(tmp_path / "x.yaml")]) == 2
    assert "bad.csv:3: ask_load" in capsys.readouterr().err
    assert not (tmp_path / "x.yaml").exists()


def test_integer_valued_estimates_are_written_as_floats(tmp_path):
    from helpaware_node.fit.paramfile import render_param_file
    text = render_param_file({"prior_a": 1, "prior_b": 2.0, "k_busy": 0, "k_load": 0.0,
                              "notice_probability": 1}, ["data: none"])
    assert "prior_a: 1.0" in text and "k_busy: 0.0" in text and "notice_probability: 1.0" in text
    with pytest.raises(Exception, match="notice_probability"):
        render_param_file({"prior_a": 1, "prior_b": 2.0, "k_busy": 0, "k_load": 0.0,
                           "notice_probability": 1.5}, [])


@pytest.mark.parametrize("k_busy_truth,expected", [(0.0, "ask"), (4.0, "continue")])
def test_written_file_changes_the_decision_as_expected(tmp_path, k_busy_truth, expected):
    # core.policy.decide (the one decision path) on a busy candidate (x = 0.6) under the
    # constants read back from the written file: where busyness lowered help in the data,
    # asking the busy person stops paying (p = c a0/(a0+b0) falls by exp(-0.6 k_busy))
    from helpaware_node.core.belief import Belief
    from helpaware_node.core.model import DecisionConfig
    from helpaware_node.core.policy import Candidate, decide, HelpNeed
    d = simulate(SiteParams(2.0, 3.0, k_busy_truth, 0.7, 0.6, 0.7), 150, 8, seed=31)
    out = tmp_path / "tuned.yaml"
    assert cli_main(["fit", write_csv(tmp_path / "o.csv", d), "--out", str(out),
                     "--folds", "0"]) == 0
    model = SiteModel(**read_param_file(str(out)))
    cand = Candidate("busy", 2.0, 100.0, Belief(model.prior_a, model.prior_b), busyness=0.6)
    decision = decide(HelpNeed("r1", "door", 100.0), [cand], 100.0, [], model, DecisionConfig())
    assert decision.action == expected
    p = decision.rationale()[0]["p"]
    assert p == pytest.approx(math.exp(-0.6 * model.k_busy) * model.prior_a
                              / (model.prior_a + model.prior_b), rel=1e-9)


def test_reads_the_store_export(tmp_path):
    # the store's own CSV export (store/export.write_csv) read back by the fit reader
    from helpaware_node.core.person import Result
    from helpaware_node.store.base import person_key, StoredEvent
    from helpaware_node.store.export import write_csv as store_write_csv
    from helpaware_node.store.sqlite import SqliteStore
    key = b"k" * 32
    store = SqliteStore(tmp_path / "s.db", "r1", key)
    results = [Result.HELPED, Result.DECLINED, Result.NO_RESPONSE, Result.COULD_NOT_ASK]
    from helpaware_node.store.base import AskEvent
    for i in range(12):
        store.append(StoredEvent(f"r1/{i}", person_key(key, f"nurse{i % 3}"), 100.0 * i,
                                 results[i % 4], 0.1 * (i % 5), 0.25 * (i % 3), "door"))
        # the ask each outcome answered, stored too (the export carries both)
        store.append_asks([AskEvent(f"r1/{100 + i}", person_key(key, f"nurse{i % 3}"),
                                    100.0 * i, "door", f"need-{i}")])
    path = tmp_path / "export.csv"
    with open(path, "w", newline="") as fh:
        assert store_write_csv(store, fh) == 24
    rows = path.read_text().splitlines()
    assert rows[0].endswith(",record,request_id")
    assert sum(r.split(",")[7] == "ask" for r in rows[1:]) == 12
    d = read_outcome_csv([str(path)])
    assert d.n_outcomes == 9 and d.n_people == 3          # could_not_ask rows skipped
    assert d.counts() == {"helped": 3, "declined": 3, "no_response": 3}
    assert sorted(np.round(d.load, 6)) == sorted(np.round([0.25 * (i % 3) for i in range(12)
                                                           if i % 4 != 3], 6))
