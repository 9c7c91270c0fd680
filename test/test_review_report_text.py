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

"""The report's words: the time span in hours and minutes, and what to do about a calibration gap.

The gap's standard error is checked against the exact binomial one (sum of p(1-p) over the
asks, each ask a Bernoulli trial), which the per-bin figure must bound from above (Jensen:
p(1-p) is concave). The commands the report prints are parsed by the tool's own argument
parser, so they are ones it accepts.
"""
import html
import math
import re
import shlex

from helpaware_node.cli import build_parser
from helpaware_node.review.html import calibration_advice, calibration_gap, duration_text
from helpaware_node.review.metrics import reliability_bins
from helpaware_node.review.report import build
from helpaware_node.review.sample import write_sample_bag
from hypothesis import given, strategies as st
import pytest


@pytest.mark.parametrize("seconds, text", [
    (0.0, "0.0 s"), (42.04, "42.0 s"), (61.0, "1 min 1 s"), (3599.0, "59 min 59 s"),
    (3600.0, "1 h 0 min"),
    (26860.0, "7 h 28 min"),        # 7 h = 25 200 s; 1 660 s = 27.7 min, to the nearest minute
    (90061.0, "1 d 1 h 1 min"),     # 86 400 + 3 600 + 61
    (float("nan"), "n/a"), (-1.0, "n/a"),
])
def test_time_span_is_written_as_people_read_it(seconds, text):
    assert duration_text(seconds) == text


@given(st.lists(st.tuples(st.floats(0.0, 1.0), st.booleans()), min_size=1, max_size=200))
def test_gap_is_mean_outcome_minus_mean_prediction_with_a_safe_error(pairs):
    p = [x for x, _ in pairs]
    y = [int(h) for _, h in pairs]
    g = calibration_gap(reliability_bins(p, y))
    n = len(p)
    assert g["asks"] == n
    assert math.isclose(g["predicted"], sum(p) / n, abs_tol=1e-9)
    assert math.isclose(g["observed"], sum(y) / n, abs_tol=1e-9)
    exact_se = math.sqrt(sum(x * (1 - x) for x in p)) / n
    assert g["standard_error"] >= exact_se - 1e-12


def bins(n, predicted, helped):
    return [{"bin_low": 0.0, "bin_high": 1.0, "count": n, "mean_predicted": predicted,
             "observed_rate": helped / n}]


def commands_in(text):
    start = text.index("<pre>") + len("<pre>")
    return [shlex.split(x) for x in html.unescape(text[start:text.index("</pre>")]).splitlines()]


def test_a_gap_larger_than_chance_says_what_to_run():
    text = calibration_advice("out/night bag", bins(100, 0.8, 40))
    assert "expects more help than people give" in text and "-40 points" in text
    fit, review = commands_in(text)
    assert fit == ["helpaware", "fit", "out/night bag", "--out", "tuned.yaml"]
    assert review == ["helpaware", "review", "out/night bag", "--params", "tuned.yaml",
                      "--out", "out/night bag_review_tuned"]
    parser = build_parser()     # the printed commands are valid for the tool itself
    args = parser.parse_args(fit[1:])
    assert (args.inputs, args.out) == (["out/night bag"], "tuned.yaml")
    args = parser.parse_args(review[1:])
    assert (args.bag, args.params) == ("out/night bag", "tuned.yaml")
    assert "ros2 run helpaware_node helpaware" in text


def test_other_verdicts():
    # se = sqrt(100 * 0.5 * 0.5) / 100 = 0.05: a gap of 0.04 is within two of them
    assert "as chance allows" in calibration_advice("b", bins(100, 0.5, 54))
    assert "expects less help than people give" in calibration_advice("b", bins(100, 0.3, 51))
    assert "too few asks" in calibration_advice("b", bins(12, 0.9, 1))
    assert "nothing to compare" in calibration_advice("b", [])


def test_report_shows_span_and_advice(tmp_path):
    bag = tmp_path / "bag"
    write_sample_bag(str(bag), needs=40, people=8, seed=3, answer_every=2)
    summary = build(str(bag), str(tmp_path / "report"))
    page = (tmp_path / "report" / "report.html").read_text()
    assert f"<td>{duration_text(summary['duration_s'])}</td>" in page
    assert re.search(r"\d+ (h|min) \d+ (min|s)", duration_text(summary["duration_s"]))
    assert f"helpaware fit {shlex.quote(str(bag))} --out tuned.yaml" in page
