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

"""Site learning on an in-process node.

Propose writes a parameter file the node loads and keeps the file's values in force; switching the
mode live puts the learned or the file's constants in force at once; every decision carries where
its constants came from.

The store is an SQLite file in tmp_path filled with a simulated site (invented data) before
the node starts; the proposal is read back with the package's own parameter-file reader and
checked against the core's SiteModel ranges.
"""
from helpaware_node.core.model import SiteModel
from helpaware_node.fit.online import LEARNED
from helpaware_node.fit.paramfile import read_param_file
from helpaware_node.fit.site_likelihood import SiteParams
from helpaware_node.store import SqliteStore
from helpaware_node.store.keys import load_site_keys
from learning_events import site
from node_harness import Rig
import pytest
from rclpy.parameter import Parameter

TRUTH = SiteParams(1.0, 3.0, 3.5, 1.0, 0.8, 0.7, 3 * 3600.0)
FAST = {"site_learning_every_outcomes": 20, "site_prior_weight": 50.0,
        "interruption_weight_s": 0.0}


def filled_store(tmp_path):
    path = tmp_path / "beliefs.sqlite3"
    keys = load_site_keys(tmp_path / "site_key")      # made owner-only, as the node does
    _, outcomes, asks = site(TRUTH, 120, 6, seed=4, robots=("peer1",))
    store = SqliteStore(path, "peer1", keys)
    store.append_many(outcomes)
    store.append_asks(asks)
    store.close()
    return path, len(outcomes)


def test_propose_writes_a_parameter_file_and_keeps_the_file_values_in_force(ctx, tmp_path):
    path, n = filled_store(tmp_path)
    proposal = tmp_path / "proposed.yaml"
    rig = Rig(ctx, namespace="/propose", store_path=str(path), robot_id="r1",
              site_learning="propose", site_learning_proposal_path=str(proposal), **FAST)
    try:
        assert rig.spin_until(lambda: proposal.exists(), 120.0)
        learning = rig.node.learning
        assert learning.learner.last.accepted and learning.learner.last.n_outcomes == n
        assert rig.node.model_in_force == rig.node.params.model == SiteModel()
        values = read_param_file(str(proposal))
        assert set(values) == set(LEARNED)
        proposed = SiteModel(**values)                   # within the core's ranges
        assert proposed.prior_a != 2.0
        assert rig.node.store.latest_learned() is None   # nothing put in force, no revision
        assert rig.show_people([{"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}])
        d = rig.open_need("n1", "handover", urgency=1.0)
        assert d["parameters"]["source"] == {"site_constants": "parameter_file", "revision": 0}
    finally:
        rig.close()


def test_switching_the_mode_live_changes_the_constants_in_force(ctx, tmp_path):
    path, _ = filled_store(tmp_path)
    rig = Rig(ctx, namespace="/switch", store_path=str(path), robot_id="r1", **FAST)
    try:
        node = rig.node
        assert rig.spin_until(lambda: node.constants_source == ("learned", 1), 120.0)
        learned = node.model_in_force
        assert learned != SiteModel() and node.session.model == learned
        assert rig.show_people([{"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}])
        d = rig.open_need("n1", "handover", urgency=1.0)
        assert d["parameters"]["source"] == {"site_constants": "learned", "revision": 1}
        assert d["parameters"]["model"]["prior_a"] == learned.prior_a
        new = next(c for c in d["candidates"] if c["person_id"] == "nurse-a")
        assert (new["a"], new["b"]) == (learned.prior_a, learned.prior_b)   # learned prior
        [r] = node.set_parameters([Parameter("site_learning", value="off")])
        assert r.successful and node.session.model == SiteModel()
        assert node.constants_source == ("parameter_file", 0)
        [r] = node.set_parameters([Parameter("site_learning", value="apply")])
        assert r.successful and node.session.model == learned
        [r] = node.set_parameters([Parameter("site_learning", value="sometimes")])
        assert not r.successful and "site_learning" in r.reason
    finally:
        rig.close()


@pytest.mark.parametrize("bad, reason", [("site_prior_weight", -1.0),
                                         ("site_learning_every_outcomes", 0)])
def test_bad_learning_parameters_are_refused_by_range(ctx, bad, reason):
    rig = Rig(ctx, namespace="/bad_learning", store_path="memory", robot_id="r1")
    try:
        [r] = rig.node.set_parameters([Parameter(bad, value=reason)])
        assert not r.successful and (bad in r.reason or "range" in r.reason)
    finally:
        rig.close()


def test_memory_store_node_learns_from_outcomes_stored_while_it_runs(ctx):
    # store_path 'memory': the node's store is in this process; outcomes appended to it
    # (as the session and the fleet link do) are copied for the worker, which refits them
    rig = Rig(ctx, namespace="/memory_learning", store_path="memory", robot_id="r1", **FAST)
    try:
        node = rig.node
        _, outcomes, asks = site(TRUTH, 60, 6, seed=8, robots=("peer1",))
        node.store.extend(outcomes)
        node.store.append_asks(asks)
        assert rig.spin_until(lambda: node.constants_source == ("learned", 1), 120.0), \
            node.learning.learner.last
        assert node.session.model == node.model_in_force != SiteModel()
        assert node.learning.learner.last.n_outcomes == len(outcomes)
        assert node.session.config == node.params.config     # costs and limits untouched
        [entry] = node.store.learned_history()
        assert entry.revision == 1 and entry.n_outcomes == len(outcomes)
    finally:
        rig.close()
