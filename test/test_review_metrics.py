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

"""Brier score, log loss, reliability bins and Beta intervals against exact hand-worked values."""
import math

from helpaware_node.review.metrics import beta_interval, brier_score, log_loss, reliability_bins
import pytest


def test_brier_hand_worked():
    # ((0.8-1)^2 + (0.3-0)^2 + (0.5-1)^2 + (0.1-0)^2) / 4 = (0.04+0.09+0.25+0.01)/4 = 0.0975
    assert brier_score([0.8, 0.3, 0.5, 0.1], [1, 0, 1, 0]) == pytest.approx(0.0975, abs=1e-15)
    assert brier_score([1.0, 0.0], [1, 0]) == 0.0
    assert brier_score([0.0], [1]) == 1.0


def test_log_loss_hand_worked():
    # -(ln 0.8 + ln 0.7 + ln 0.5 + ln 0.9) / 4
    expected = -(math.log(0.8) + math.log(0.7) + math.log(0.5) + math.log(0.9)) / 4
    assert log_loss([0.8, 0.3, 0.5, 0.1], [1, 0, 1, 0]) == pytest.approx(expected, rel=1e-14)
    assert log_loss([0.5, 0.5], [1, 0]) == pytest.approx(math.log(2), rel=1e-15)
    # a certain wrong prediction is clipped, not infinite: -ln(1e-15)
    assert log_loss([0.0], [1]) == pytest.approx(-math.log(1e-15), rel=1e-9)


def test_against_scikit_learn_if_installed():
    metrics = pytest.importorskip("sklearn.metrics")
    p = [0.9, 0.2, 0.65, 0.4, 0.05, 0.77]
    y = [1, 0, 0, 1, 0, 1]
    assert brier_score(p, y) == pytest.approx(metrics.brier_score_loss(y, p), rel=1e-12)
    assert log_loss(p, y) == pytest.approx(metrics.log_loss(y, p), rel=1e-12)


def test_empty_input_gives_nan():
    assert math.isnan(brier_score([], [])) and math.isnan(log_loss([], []))


def test_reliability_bins_hand_worked():
    rows = reliability_bins([0.05, 0.15, 0.12, 0.95, 1.0], [0, 1, 0, 1, 1], n_bins=10)
    assert [(r["bin_low"], r["count"]) for r in rows] == [(0.0, 1), (0.1, 2), (0.9, 2)]
    assert rows[1]["mean_predicted"] == pytest.approx(0.135)
    assert rows[1]["observed_rate"] == 0.5 and rows[2]["observed_rate"] == 1.0


def test_beta_interval_exact_cases():
    lo, hi = beta_interval(1.0, 1.0)            # uniform: quantiles are q itself
    assert (lo, hi) == pytest.approx((0.05, 0.95), abs=1e-12)
    lo, hi = beta_interval(2.0, 1.0)            # cdf x^2: quantile sqrt(q)
    assert (lo, hi) == pytest.approx((math.sqrt(0.05), math.sqrt(0.95)), abs=1e-12)
