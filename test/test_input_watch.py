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

"""The input watchdog's logic (helpaware_node/input_watch.py), without ROS.

Expected values are exact arithmetic on the times the tests pass in (the class reads no clock);
the invariants (one begin and one end per silence episode, alternating; the silence is the time
since the last message) are checked with hypothesis over random message and check times.
"""
from fractions import Fraction

from helpaware_node.input_watch import change_text, InputWatch, warning_text
from hypothesis import given, strategies as st
import pytest

TOPICS = ("people", "task_status")


def statuses_by_topic(statuses):
    return {s.topic: s for s in statuses}


def test_silence_counts_from_the_start_until_the_first_message():
    w = InputWatch(TOPICS, start_s=100.0)
    statuses, changes = w.check(104.5, {"people": 10.0}, {"people": 1, "task_status": 0})
    people = statuses_by_topic(statuses)["people"]
    assert people.silent_s == 4.5 and people.first_message_after_s is None
    assert not people.warn and changes == []
    w.note("people", 101.25)
    people = statuses_by_topic(w.check(104.5, {"people": 10.0}, {})[0])["people"]
    assert people.silent_s == 3.25 and people.first_message_after_s == 1.25


def test_one_change_when_a_silence_begins_and_one_when_it_ends():
    w = InputWatch(TOPICS, start_s=0.0)
    limits = {"people": 2.0}
    w.note("people", 1.0)
    assert w.check(2.5, limits, {"people": 1})[1] == []          # 1.5 s: under the limit
    statuses, changes = w.check(3.5, limits, {"people": 1})      # 2.5 s: over it
    assert [(c.topic, c.began, c.silence_s, c.publishers) for c in changes] == [
        ("people", True, 2.5, 1)]
    assert statuses_by_topic(statuses)["people"].warn
    for t in (4.0, 5.0, 9.0):                                    # still silent: said once only
        assert w.check(t, limits, {"people": 1})[1] == []
    w.note("people", 9.5)
    statuses, changes = w.check(10.0, limits, {"people": 2})
    assert [(c.began, c.heard, c.silence_s, c.publishers) for c in changes] == [
        (False, True, 8.5, 2)]                                   # 1.0 -> 9.5 without a message
    assert not statuses_by_topic(statuses)["people"].warn
    # a second episode is said again
    assert [c.began for c in w.check(12.0, limits, {})[1]] == [True]


def test_a_zero_limit_never_warns_and_ends_an_episode_without_a_message():
    w = InputWatch(TOPICS, start_s=0.0)
    assert w.check(50.0, {"people": 0.0, "task_status": 0.0}, {})[1] == []
    assert [c.topic for c in w.check(51.0, {"people": 5.0}, {})[1]] == ["people"]
    statuses, changes = w.check(52.0, {"people": 0.0}, {})
    assert [(c.began, c.heard, c.silence_s) for c in changes] == [(False, False, 52.0)]
    assert not any(s.warn for s in statuses)
    assert "limit now 0 s" in change_text(changes[0], 0.0)


def test_topics_are_watched_apart():
    w = InputWatch(TOPICS, start_s=0.0)
    w.note("people", 9.0)
    statuses, changes = w.check(10.5, {"people": 5.0, "task_status": 5.0},
                                {"people": 1, "task_status": 0})
    assert [c.topic for c in changes] == ["task_status"]
    text = warning_text(statuses)
    assert text == "no input: task_status silent 10.5 s (0 publishers matched)"


def test_the_warning_and_log_lines_name_topic_silence_and_publishers():
    w = InputWatch(TOPICS, start_s=0.0)
    statuses, changes = w.check(12.0, {"people": 10.0, "task_status": 10.0},
                                {"people": 1, "task_status": 3})
    assert warning_text(statuses) == ("no input: people silent 12.0 s (1 publisher matched); "
                                      "task_status silent 12.0 s (3 publishers matched)")
    line = change_text(changes[0], 10.0)
    assert line.startswith("people: no message for 12.0 s (1 publisher matched, limit 10 s)")


def test_unknown_topics_and_empty_watch_lists_are_refused_with_the_name():
    w = InputWatch(TOPICS, start_s=0.0)
    with pytest.raises(KeyError, match="outcome"):
        w.note("outcome", 1.0)
    with pytest.raises(ValueError, match="topics"):
        InputWatch((), start_s=0.0)
    with pytest.raises(ValueError, match="topics"):
        InputWatch(("people", "people"), start_s=0.0)


def test_a_message_stamped_earlier_than_the_last_does_not_move_the_silence_back():
    w = InputWatch(TOPICS, start_s=0.0)
    w.note("people", 5.0)
    w.note("people", 3.0)       # a late callback with an older steady time
    assert statuses_by_topic(w.check(6.0, {}, {})[0])["people"].silent_s == 1.0


events = st.lists(st.tuples(st.sampled_from(["note", "check"]),
                            st.integers(min_value=0, max_value=40)), min_size=1, max_size=60)


@given(events, st.integers(min_value=1, max_value=10))
def test_episodes_alternate_and_the_silence_is_the_time_since_the_last_message(steps, limit):
    """Times are whole quarter-seconds so every expected value is exact (Fraction)."""
    w = InputWatch(["people"], start_s=0.0)
    now = Fraction(0)
    last = Fraction(0)
    began_open = False
    for kind, dt in steps:
        now += Fraction(dt, 4)
        if kind == "note":
            w.note("people", float(now))
            last = now
            continue
        statuses, changes = w.check(float(now), {"people": float(limit)}, {"people": 1})
        (status,) = statuses
        assert status.silent_s == float(now - last)
        assert status.warn == (now - last > limit)
        for c in changes:
            assert c.began != began_open          # begin, end, begin, ... never twice
            began_open = c.began
        assert began_open == status.warn         # the open episode is exactly the warning
