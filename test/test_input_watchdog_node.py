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

"""The input watchdog on a running node.

/diagnostics goes WARN while `people` is silent for longer than `people_silence_warn_s`, naming the
topic, the matched publishers and the silence, and the log says so once per silence
(helpaware_node/input_watch.py has the logic's own tests). Bounded spins; the only time in an
assertion is the parameter itself.
"""
from diagnostic_msgs.msg import DiagnosticStatus
from node_harness import Rig
from rclpy.parameter import Parameter

LIMIT_S = 0.6
NURSE = {"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1}


def _statuses(rig, since):
    return [s for arr in rig.diagnostics[since:] for s in arr.status]


def _values(status):
    return {kv.key: kv.value for kv in status.values}


def test_silent_people_turn_diagnostics_warn_once_and_back(ctx, capfd):
    rig = Rig(ctx, namespace="/silence", people_silence_warn_s=LIMIT_S, diagnostics_period_s=0.2)
    try:
        assert rig.connected() and rig.show_people([NURSE])
        mark = len(rig.diagnostics)

        def warned():
            return next((s for s in _statuses(rig, mark) if s.level == DiagnosticStatus.WARN
                         and "people silent" in s.message), None)
        assert rig.spin_until(lambda: warned() is not None, 30)
        status = warned()
        values = _values(status)
        assert values["people.publishers"] == "1"               # the driver's publisher
        assert float(values["people.silent_s"]) > LIMIT_S
        assert "1 publisher matched" in status.message
        assert "task_status" not in status.message              # its limit is 0 by default
        assert values["task_status.publishers"] == "1" and "task_status.silent_s" in values
        # still silent for several more periods: the log says it once
        later = len(rig.diagnostics)
        assert rig.spin_until(lambda: len(rig.diagnostics) >= later + 4, 30)
        assert all(s.level == DiagnosticStatus.WARN for s in _statuses(rig, later))

        # people again: the warning goes, and the end of the silence is logged once; the
        # limit is raised with it, so a slow machine cannot start a second silence before
        # the end of the test
        assert rig.show_people([NURSE])
        rig.node.set_parameters([Parameter("people_silence_warn_s", value=3600.0)])
        back = len(rig.diagnostics)
        assert rig.spin_until(lambda: any("people silent" not in s.message
                                          for s in _statuses(rig, back)), 30)
        recovered = next(s for s in _statuses(rig, back) if "people silent" not in s.message)
        assert recovered.level == DiagnosticStatus.OK
    finally:
        rig.close()
    log = capfd.readouterr().err
    assert log.count("people: no message for") == 1, log[-3000:]
    assert log.count("people: messages again after") == 1, log[-3000:]


def test_a_zero_limit_reports_the_silence_but_never_warns(ctx):
    rig = Rig(ctx, namespace="/silence_off", people_silence_warn_s=0.0, diagnostics_period_s=0.2)
    try:
        assert rig.connected()
        mark = len(rig.diagnostics)
        # silent from the start for well over any limit a test would set
        assert rig.spin_until(lambda: any(float(_values(s).get("people.silent_s", "0")) > 2.0
                                          for s in _statuses(rig, mark)), 30)
        assert all(s.level == DiagnosticStatus.OK for s in _statuses(rig, mark))
        assert all(_values(s)["people.first_message_after_s"] == ""
                   for s in _statuses(rig, mark))
    finally:
        rig.close()
