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

"""Site learning (fit/online.py) without ROS.

The refit against the offline fit, shrinkage, degenerate streams, fleet determinism, the half-life,
the store's history, replay.

Outside references, named beside each check: BDA3 Table 5.1 (rat tumours) with the reference
MLE in test/data/REFERENCE_VALUES.md where the penalty is 0; scipy.optimize (Nelder-Mead and
Powell) on the same penalised objective; exact algebra for the shrinkage (the expected score
of the model's own outcomes is zero at its constants; the limits weight 0 and weight -> inf);
the core's own ask_load for the recomputed loads, and a brute-force loop for the ask pairs.
"""
import csv
import io
import math
import random

from helpaware_node.core.context import ask_load
from helpaware_node.core.model import SiteModel
from helpaware_node.core.person import Result
from helpaware_node.fit import online
from helpaware_node.fit.convergence import hessian_by_differences
from helpaware_node.fit.data import ask_ages_from_times, read_outcome_csv
from helpaware_node.fit.online import LEARNED, learning_data, LearningSettings, SiteLearner
from helpaware_node.fit.pseudo_outcomes import curvature_floor, MIN_INFORMATION, pseudo_outcomes
from helpaware_node.fit.site_fit import (
    fit_site,
    MIN_OUTCOMES,
    NAMES,
    Objective,
    theta_bounds,
    to_theta,
)
from helpaware_node.fit.site_likelihood import SiteLikelihood, SiteParams
from helpaware_node.store import MemoryStore, SqliteStore
from helpaware_node.store.base import AskEvent, LearnedEntry, StoredEvent
from helpaware_node.store.export import write_csv
from learning_events import key_of, session_across_a_change, site
import numpy as np
import pytest
from reference_tables import rat_tumour_groups
from scipy import optimize

FILE = SiteModel()                                  # the shipped defaults
TRUTH = SiteParams(1.0, 3.0, 3.0, 1.0, 0.6, 0.7, 6 * 3600.0)   # strangers, an ask weighs hours
KEY = b"k" * 32


@pytest.fixture(scope="module")
def big_site():
    return site(TRUTH, 300, 8, seed=5, robots=("r1", "r2"))


def refit(outcomes, asks, weight=200.0, model=FILE, **kw):
    learner = SiteLearner(model, LearningSettings(prior_weight=weight, **kw))
    return learner, learner.refit(outcomes, asks, 1000.0)


def test_min_outcomes_is_the_fits():
    assert online.MIN_OUTCOMES == MIN_OUTCOMES


def test_ask_pairs_match_a_brute_force_loop_and_the_core_ask_load():
    # a loop over every (outcome, ask) of the same person, and core.context.ask_load
    rng = np.random.default_rng(1)
    op, ot = rng.integers(0, 5, 40), rng.uniform(0, 5000, 40)
    ap, at = rng.integers(0, 5, 90), rng.uniform(0, 5000, 90)
    at[:10] = ot[:10]                        # the ask an outcome answers shares its time
    ap[:10] = op[:10]
    ages = ask_ages_from_times(op, ot, ap, at)
    for h in (60.0, 900.0, 86400.0):
        load, _ = ages.loads(h, op.size)
        for j in range(op.size):
            earlier = [t for p, t in zip(ap, at) if p == op[j] and t < ot[j]]
            # asks older than 40 half-lives are left out: each would add under 2^-40
            assert load[j] == pytest.approx(ask_load(earlier, ot[j], h), rel=1e-12, abs=1e-11)


def test_weight_zero_is_helpaware_fit_on_the_store_export(tmp_path, big_site):
    # the offline path: events in an SQLite store, `helpaware store export` CSV, fit.data
    # reader, fit_site; the online path: the learner with prior weight 0 on the same events
    _, outcomes, asks = big_site
    store = SqliteStore(tmp_path / "s.sqlite3", "r1", KEY)
    store.append_many(outcomes)
    store.append_asks(asks)
    buf = io.StringIO()
    write_csv(store, buf)
    path = tmp_path / "export.csv"
    path.write_text(buf.getvalue())
    offline = fit_site(read_outcome_csv([str(path)]), half_life_s=FILE.ask_memory_half_life_s)
    assert offline.converged
    _, r = refit(*store.learning_reader()(), weight=0.0)
    assert r.accepted and r.applied and r.n_outcomes == offline.n_outcomes
    for name in LEARNED:
        assert getattr(r.model, name) == pytest.approx(getattr(offline.params, name), rel=2e-3)


def test_weight_zero_on_the_rat_tumours_is_the_published_beta_binomial_fit():
    # BDA3 Table 5.1, first 70 groups as 70 people with no context (REFERENCE_VALUES.md:
    # a = 2.3048, b = 14.0798); k's and notice_probability are not identified and stay
    y, n = rat_tumour_groups()
    outcomes = []
    for g, (yi, ni) in enumerate(zip(y[:70], n[:70])):
        for j in range(ni):
            outcomes.append(StoredEvent(f"r1/{g}-{j}", key_of(f"group{g}"), float(j),
                                        Result.HELPED if j < yi else Result.DECLINED, 0.0, 0.0))
    _, r = refit(outcomes, [], weight=0.0)
    assert r.accepted
    assert r.model.prior_a == pytest.approx(2.3048, abs=1e-3)
    assert r.model.prior_b == pytest.approx(14.0798, abs=1e-3)


def test_the_penalty_is_the_expected_log_likelihood_with_its_maximum_at_the_file():
    # exact algebra: sum_y P_file(y) d log P_theta(y) / d theta = d/dtheta sum_y P_theta(y) = 0
    # at theta = file, for the model's own outcome probabilities; pseudo-outcomes sum to the
    # weight; the floor lifts every direction's curvature to weight * MIN_INFORMATION
    target = online.site_params(FILE, 0.6)
    pseudo = pseudo_outcomes(target, 200.0)
    assert float(pseudo.weight @ np.bincount(pseudo.person)) == pytest.approx(200.0)
    lik = SiteLikelihood(pseudo, use_reporting_factor=True)
    centre, prec = curvature_floor(target, 200.0, pseudo)
    obj = Objective([lik], np.ones(len(NAMES), bool), centre, quadratic=(centre, prec))
    _, grad = obj.loglik_and_grad(centre)
    assert np.max(np.abs(grad)) < 1e-8
    hess = hessian_by_differences(lambda t: obj.loglik_and_grad(t)[1], centre, range(len(NAMES)))
    assert np.min(np.linalg.eigvalsh(-hess)) >= 200.0 * MIN_INFORMATION * (1 - 1e-4)


def test_shrinkage_limits_weight_zero_and_infinite(big_site):
    # exact algebra of a penalised maximum: weight 0 is the data's maximum, weight -> inf the
    # penalty's, which is the parameter file's values
    _, outcomes, asks = big_site
    _, free = refit(outcomes, asks, weight=0.0)
    _, held = refit(outcomes, asks, weight=1e8)
    _, mid = refit(outcomes, asks, weight=200.0)
    for name in LEARNED:
        assert getattr(held.model, name) == pytest.approx(getattr(FILE, name), rel=2e-3, abs=1e-4)
    # in between, each constant the data determine lies between the two (monotone shrinkage)
    for name in ("prior_a", "k_busy", "k_load", "notice_probability"):
        lo, hi = sorted((getattr(FILE, name), getattr(free.model, name)))
        assert lo - 1e-9 <= getattr(mid.model, name) <= hi + 1e-9, name


def test_penalised_refit_is_the_maximum_scipy_finds_on_the_same_objective(big_site):
    # scipy.optimize: Powell (derivative-free) from the parameter file's values on the very
    # objective the refit maximises (data + pseudo-outcomes + floor) finds no higher point
    _, outcomes, asks = big_site
    data = learning_data(outcomes, asks)
    fit, tau = online.refit_constants(data, FILE, 200.0, online.MODEL_RANGES)
    assert fit.converged
    target = online.site_params(FILE, tau)
    pseudo = pseudo_outcomes(target, 200.0)
    obj = Objective([SiteLikelihood(data, use_reporting_factor=True),
                     SiteLikelihood(pseudo, use_reporting_factor=True)],
                    np.ones(len(NAMES), bool), to_theta(target),
                    quadratic=curvature_floor(target, 200.0, pseudo))
    ours = to_theta(fit.params)

    def negative(z):
        v = obj.loglik_theta(z)
        return -v if math.isfinite(v) else 1e300
    res = optimize.minimize(negative, to_theta(target), method="Powell", bounds=theta_bounds(),
                            options={"xtol": 1e-6, "ftol": 1e-10, "maxiter": 20000})
    assert -res.fun <= obj.loglik_theta(ours) + 1e-5
    assert np.allclose(res.x, ours, atol=5e-3)


def test_few_outcomes_barely_move_the_constants(big_site):
    # 20 outcomes of 4 people against 200 pseudo-outcomes: about a tenth of the way towards
    # what those 20 say (which may be far: 4 people cannot tell their spread)
    sim, outcomes, asks = big_site
    few_people = {e.person_key for e in outcomes[:400]}
    few = [e for e in outcomes if e.person_key in sorted(few_people)[:4]][:20]
    assert len(few) == 20
    _, r = refit(few, asks)
    assert r.accepted
    for name in ("prior_a", "prior_b", "ask_memory_half_life_s"):
        assert abs(math.log(getattr(r.model, name) / getattr(FILE, name))) < 0.25, name
    for name in ("k_busy", "k_load"):
        assert abs(getattr(r.model, name) - getattr(FILE, name)) < 0.3, name
    assert abs(r.model.notice_probability - FILE.notice_probability) < 0.05


@pytest.mark.parametrize("stream", ["all_helped", "all_declined", "one_person", "one_context"])
def test_degenerate_streams_stay_finite_and_in_range(stream):
    rng = random.Random(3)
    outcomes, asks = [], []
    for i in range(60):
        person = "solo" if stream == "one_person" else f"p{i % 12}"
        if stream == "all_helped":
            result = Result.HELPED
        elif stream == "all_declined":
            result = Result.DECLINED
        else:
            result = rng.choice([Result.HELPED, Result.DECLINED, Result.NO_RESPONSE])
        busy = 0.3 if stream == "one_context" else rng.random()
        t = 600.0 * i
        key = key_of(person)
        if stream != "one_context":         # one context: no earlier asks either
            asks.append(AskEvent(f"r1/a{i}", key, t))
        outcomes.append(StoredEvent(f"r1/o{i}", key, t, result, busy, 0.0))
    learner, r = refit(outcomes, asks)
    model = r.model
    for name in LEARNED:
        v = getattr(model, name)
        lo, hi = online.MODEL_RANGES[name]
        assert math.isfinite(v) and lo <= v <= hi, (stream, name, v)
    SiteModel(**{k: getattr(model, k) for k in LEARNED})       # the core accepts it
    if r.accepted:
        assert r.verdict.converged
    else:
        assert model == FILE and learner.revision == 0


def test_a_refit_that_does_not_converge_changes_nothing(big_site):
    _, outcomes, asks = big_site
    learner, r = refit(outcomes, asks, max_iter=2)
    assert not r.accepted and not r.verdict.converged and "not converged" in r.reason
    assert r.model == r.previous == FILE and learner.current == FILE and learner.revision == 0


def test_mode_off_never_refits_and_propose_keeps_the_file_in_force(big_site):
    _, outcomes, asks = big_site
    off = SiteLearner(FILE, LearningSettings(mode="off"))
    assert not off.due(10 ** 6, 1e9)
    assert not off.refit(outcomes, asks, 0.0).accepted
    prop = SiteLearner(FILE, LearningSettings(mode="propose"))
    r = prop.refit(outcomes, asks, 0.0)
    assert r.accepted and not r.applied and r.model == FILE and prop.current == FILE
    assert r.proposal != FILE and prop.source == ("parameter_file", 0)


def test_costs_and_hard_limits_are_never_touched(big_site):
    _, outcomes, asks = big_site
    file_model = SiteModel(evidence_half_life_s=3600.0, default_busyness=0.55)
    _, r = refit(outcomes, asks, model=file_model)
    assert r.applied
    assert (r.model.evidence_half_life_s, r.model.default_busyness) == (3600.0, 0.55)
    assert set(online.learned_values(r.model)) == set(LEARNED)   # SiteModel fields only


def test_due_after_n_outcomes_or_t_seconds_whichever_first():
    learner = SiteLearner(FILE, LearningSettings(every_outcomes=50, every_s=3600.0))
    assert not learner.due(49, 0.0)
    assert learner.due(50, 1.0)
    assert not learner.due(15, 3599.0)          # neither yet
    assert learner.due(15, 3600.0)              # T first
    assert not learner.due(0, 1e9)              # nothing new: a refit would change nothing
    assert not learner.due(MIN_OUTCOMES - 1, 1e9)   # too few for any fit


def test_two_robots_given_the_same_events_in_any_order_reach_identical_constants(
        tmp_path, big_site):
    _, outcomes, asks = big_site
    a = SqliteStore(tmp_path / "a.sqlite3", "r1", KEY)
    b = SqliteStore(tmp_path / "b.sqlite3", "r2", KEY)
    a.append_many(outcomes)
    a.append_asks(asks)
    shuffled = list(outcomes)
    random.Random(7).shuffle(shuffled)
    for chunk in range(0, len(shuffled), 97):     # arrivals in batches, asks before outcomes
        b.append_asks(asks[chunk:chunk + 97][::-1])
        b.append_many(shuffled[chunk:chunk + 97])
    b.append_asks(asks)
    ra = SiteLearner(FILE, LearningSettings()).refit(*a.learning_reader()(), 10.0)
    rb = SiteLearner(FILE, LearningSettings()).refit(*b.learning_reader()(), 99.0)
    assert ra.applied and rb.applied
    assert online.learned_values(ra.model) == online.learned_values(rb.model)   # bit for bit
    assert ra.decline_aloud == rb.decline_aloud


def test_history_persists_and_a_restart_resumes_with_the_learned_constants(tmp_path, big_site):
    _, outcomes, asks = big_site
    path = tmp_path / "s.sqlite3"
    store = SqliteStore(path, "r1", KEY)
    learner = SiteLearner(FILE, LearningSettings())
    r = learner.refit(outcomes, asks, 5000.0)
    store.record_learned(learner.entry(r, "r1", "2030-01-01T00:00:00Z"))
    with pytest.raises(ValueError, match="revision"):
        store.record_learned(learner.entry(r, "r1"))        # a revision is kept once
    store.close()
    again = SqliteStore(path, "r1", KEY)
    [entry] = again.learned_history()
    assert entry.revision == 1 and entry.n_outcomes == len(outcomes)
    assert entry.verdict["converged"] and entry.target["prior_weight"] == 200.0
    resumed = SiteLearner(FILE, LearningSettings(), resume=again.latest_learned())
    assert resumed.current == r.model and resumed.source == ("learned", 1)
    assert resumed.new_outcomes(len(outcomes)) == 0 and not resumed.due(0, 1e12)
    assert SiteLearner(FILE, LearningSettings(mode="off"),
                       resume=entry).current == FILE          # frozen: the file in force


def test_memory_store_keeps_history_and_refuses_bad_rows():
    store = MemoryStore(robot_id="r1")
    entry = LearnedEntry(1, 0.0, {"prior_a": 1.0}, {"prior_a": 2.0}, 12, {})
    store.record_learned(entry)
    assert store.latest_learned() == entry
    with pytest.raises(ValueError, match="constants"):
        store.record_learned(LearnedEntry(2, 0.0, {"prior_a": math.nan}, {}, 12, {}))


@pytest.mark.parametrize("half_life_s, seed", [(300.0, 3), (3 * 3600.0, 4), (86400.0, 5)])
def test_half_life_recovered_within_its_standard_errors(half_life_s, seed):
    # simulated with a known half-life (5 minutes, 3 hours, a day); the robot's own load
    # column used a wrong one (30 min); 15 % of asks got no outcome but still weigh. Seeds
    # differ: the simulation scales with h, so one seed would repeat one data set
    truth = SiteParams(2.0, 3.0, 1.5, 1.2, 0.6, 0.7, half_life_s)
    sim = site(truth, 400, 8, seed=seed)[0]
    fit = fit_site(sim.data, half_life_s=1800.0)
    assert fit.converged
    se = fit.std_errors["ask_memory_half_life_s"]
    assert 0 < se < half_life_s
    assert abs(fit.params.ask_memory_half_life_s - half_life_s) < 2.0 * se


def test_export_without_ask_rows_keeps_the_half_life_fixed(tmp_path, big_site):
    # an export from before asks were stored has ask_load but no ask rows: nothing to
    # recompute the load from, so the robot's column is used and the half-life not fitted
    _, outcomes, _ = big_site
    path = tmp_path / "old.csv"
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["event_id", "person_key", "time_s", "busyness", "ask_load", "result"])
        for e in outcomes:
            w.writerow([e.event_id, e.person_key, e.time_s, e.busyness, e.ask_load,
                        e.result.value])
    fit = fit_site(read_outcome_csv([str(path)]))
    assert "ask_memory_half_life_s" in fit.fixed and fit.params.ask_memory_half_life_s is None


LEARNED_ELSEWHERE = {"prior_a": 0.4, "prior_b": 3.6, "k_busy": 5.0, "k_load": 1.5,
                     "notice_probability": 0.5, "ask_memory_half_life_s": 7200.0}


def test_replay_reproduces_decisions_across_a_change_of_constants():
    # a help session decides, site learning puts other constants in force midway (as the
    # node does: session.set_parameters), and every decision document replays exactly from
    # its own parameters; beliefs after the change are the fold under the new constants
    from helpaware_node import wire
    from helpaware_node.core import fold_events
    from helpaware_node.review.replay import replay_one
    docs, _, store, s, learned = session_across_a_change(LEARNED_ELSEWHERE)
    assert len(docs) == 40
    changed = 0
    for _, text in docs:
        doc = wire.decode("decision", text)
        model, cfg = wire.recorded_params(doc)
        again = replay_one(doc, model, cfg)
        assert (again.action, again.person_id) == (doc["action"], doc["person_id"])
        kind, revision = wire.recorded_source(doc)
        assert (model == learned) == (kind == "learned") and revision == (kind == "learned")
        if kind == "learned":
            other = replay_one(doc, FILE, cfg)
            changed += (other.action, other.person_id) != (again.action, again.person_id)
            new_person = next(c for c in doc["candidates"] if c["person_id"].startswith("new"))
            assert (new_person["a"], new_person["b"]) == (0.4, 3.6)   # the learned prior
    assert changed > 0      # the change of constants changed decisions, and replay saw it
    for key in store.keys():
        events = [e.to_outcome() for e in store.events_for(key)]
        assert s.memory.record_for(key).belief == fold_events(events, learned)[0]


def test_store_learned_action_shows_the_history(tmp_path, capsys, big_site):
    # `helpaware store learned` on a file holding two revisions: both rows, oldest first,
    # with the values that were stored (written here, read back through the command)
    from helpaware_node import cli
    from helpaware_node.store.keys import load_site_key
    key = load_site_key(tmp_path / "site_key")
    store = SqliteStore(tmp_path / "beliefs.sqlite3", "r1", key)
    for rev, a in ((1, 1.25), (2, 0.75)):
        store.record_learned(LearnedEntry(rev, 100.0 * rev, {"prior_a": a, "prior_b": 3.0},
                                          {"prior_a": 2.0, "prior_weight": 200.0}, 40 * rev,
                                          {"converged": True}, f"2030-01-0{rev}T00:00:00Z", "r1"))
    store.close()
    assert cli.main(["store", "--path", str(tmp_path / "beliefs.sqlite3"), "learned"]) == 0
    out = capsys.readouterr().out
    lines = [line for line in out.splitlines() if line.strip()[:1] in ("1", "2")]
    assert [line.split()[0] for line in lines] == ["1", "2"]
    assert "1.25" in lines[0] and "0.75" in lines[1] and "80" in lines[1]
    assert "shrunk towards (parameter file): prior_a 2" in out


def test_store_file_at_version_3_is_upgraded_with_its_asks_and_an_empty_history(
        tmp_path, monkeypatch):
    # a file written at version 3 (the store's own write path, migrations stopped there):
    # version 4 adds the history table; asks and events stay as they were (sqlite3 read-only)
    import functools
    import sqlite3

    from helpaware_node.store import schema, sqlite as sqlite_module
    with monkeypatch.context() as m:
        m.setattr(sqlite_module, "migrate", functools.partial(schema.migrate, target=3))
        old = SqliteStore(tmp_path / "v3.sqlite3", "r1", KEY)
        old.append(StoredEvent("r1/1", key_of("a"), 5.0, Result.HELPED, 0.2, 0.0))
        old.append_asks([AskEvent("r1/2", key_of("a"), 6.0, "door", "n1")])
        old.close()
    conn = sqlite3.connect(f"file:{tmp_path / 'v3.sqlite3'}?mode=ro", uri=True)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 3
    conn.close()
    store = SqliteStore(tmp_path / "v3.sqlite3", "r1", KEY)
    assert store.counts()["schema_version"] == 4 and store.learned_history() == []
    assert len(store.asks(person_key=key_of("a"))) == 1 and store.event_count() == 1
    store.record_learned(LearnedEntry(1, 7.0, {"prior_a": 1.5}, {"prior_a": 2.0}, 10, {}))
    assert store.latest_learned().constants == {"prior_a": 1.5}


def test_fit_command_estimates_the_half_life_from_the_exports_ask_rows(tmp_path, capsys,
                                                                       big_site):
    # `helpaware fit` on `helpaware store export`: the half-life row is fitted with a
    # standard error, and the written parameter file carries it (read back with the node's
    # own reader, checked against SiteModel's ranges)
    from helpaware_node import cli
    from helpaware_node.fit.paramfile import read_param_file
    _, outcomes, asks = big_site
    store = SqliteStore(tmp_path / "s.sqlite3", "r1", KEY)
    store.append_many(outcomes)
    store.append_asks(asks)
    with open(tmp_path / "export.csv", "w") as fh:
        write_csv(store, fh)
    out = tmp_path / "tuned.yaml"
    code = cli.main(["fit", str(tmp_path / "export.csv"), "--out", str(out), "--folds", "0"])
    printed = capsys.readouterr().out
    assert code == 0, printed
    row = next(line for line in printed.splitlines()
               if line.startswith("ask_memory_half_life_s"))
    assert row.split()[-1] == "fitted" and float(row.split()[2]) > 0      # estimate, s.e.
    values = read_param_file(str(out))
    assert float(row.split()[1]) == pytest.approx(values["ask_memory_half_life_s"], rel=1e-3)
    SiteModel(**values)
