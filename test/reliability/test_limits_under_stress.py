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

"""Limits under stress: many seeded random decisions through core.policy.decide.

20 000 decisions in `make test`, 100 000 under `make soak` (HELPAWARE_SOAK=1). Checked against
an independent ledger of every ask (exact counting, reliability_sequence.limit_breaches): no
opted-out person asked, no re-ask inside min_reask_interval_s, no per-person daily cap or robot
hourly cap exceeded.
"""
from helpaware_node.core.model import DecisionConfig, SiteModel
import numpy as np
import pytest
from reliability_sequence import limit_breaches, run_sequence, scaled

TOTAL = scaled(20_000, 100_000)

# Each configuration makes a different limit the binding one (needs often enough that the
# limits, not the score, stop most asks); the binding one is checked to exclude > 100 times.
CONFIGS = [
    ("defaults", DecisionConfig(), 60.0, "person_daily_cap"),
    ("hourly_cap_binds", DecisionConfig(max_asks_per_hour=3, max_asks_per_person_per_day=50,
                                        min_reask_interval_s=60.0), 20.0, "robot_hourly_cap"),
    ("reask_binds", DecisionConfig(min_reask_interval_s=7200.0, max_asks_per_person_per_day=20,
                                   max_asks_per_hour=100), 30.0, "reask_interval"),
    ("daily_cap_binds", DecisionConfig(max_asks_per_person_per_day=1, min_reask_interval_s=0.0,
                                       max_asks_per_hour=1000), 60.0, "person_daily_cap"),
]


@pytest.mark.parametrize("name,config,mean_gap_s,binding", CONFIGS, ids=[c[0] for c in CONFIGS])
def test_no_limit_breached(name, config, mean_gap_s, binding):
    rng = np.random.default_rng(len(name) * 7919)   # one fixed seed per configuration
    n = TOTAL // len(CONFIGS)
    times = np.cumsum(rng.exponential(mean_gap_s, size=n))
    model = SiteModel(evidence_half_life_s=float(rng.choice([0.0, 86400.0])))
    ledger = run_sequence(rng, n, times, model, config)
    assert ledger.decisions == n
    assert ledger.asks_of_opted_out == 0
    assert limit_breaches(ledger, config) == {"reask_interval": 0, "person_daily_cap": 0,
                                              "robot_hourly_cap": 0}
    # the run must actually press on the limits, or it proves nothing
    assert len(ledger.robot_asks_s) > 20
    assert ledger.exclusions.get(binding, 0) > 100
    assert ledger.exclusions.get("opted_out", 0) > 100


def test_ledger_check_catches_a_breach():
    """The checker itself can fail: a hand-made ledger with one breach of each limit."""
    from reliability_sequence import Ledger
    config = DecisionConfig(max_asks_per_person_per_day=2, max_asks_per_hour=2,
                            min_reask_interval_s=900.0)
    ledger = Ledger(person_asks_s={"a": [0.0, 100.0], "b": [0.0, 1000.0, 2000.0]},
                    robot_asks_s=[0.0, 100.0, 200.0])
    assert limit_breaches(ledger, config) == {"reask_interval": 1, "person_daily_cap": 1,
                                              "robot_hourly_cap": 1}
