"""The node as its own process, started exactly from launch_config, driven by a second process."""
import json
import os
import signal
import subprocess
import sys

import pytest

from helpaware_node import wire
from helpaware_node.core import decide
from helpaware_node.ros import launch_config

HERE = os.path.dirname(__file__)


def _stop(proc, sig):
    proc.send_signal(sig)
    try:
        out, err = proc.communicate(timeout=30)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
    return proc.returncode, err


def test_node_process_from_launch_config_decides_for_a_driver_process(tmp_path):
    remaps = tuple(launch_config.REMAPS) + (("people", "perception/people"),)
    node = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                               params=launch_config.SITE_PARAMS_FILE, namespace="/ward3",
                               remaps=[r for r in remaps if r != ("people", "people")])
    try:
        drv = subprocess.run([sys.executable, os.path.join(HERE, "cross_process_driver.py"),
                              "perception/people", "/ward3"], capture_output=True, text=True,
                             timeout=240)
        lines = [json.loads(x) for x in drv.stdout.splitlines() if x.startswith("{")]
        assert lines and lines[-1].get("done"), drv.stderr[-3000:]
        decisions = [x for x in lines if "action" in x]
        assert len(decisions) == 3, drv.stderr[-2000:]
        first = decisions[0]
        assert first["action"] == "ask" and first["person_id"] == "nurse-a"
        # the node ran with the site file: its parameters are recorded in every decision
        model, config = wire.recorded_params(first)
        assert config.continue_costs_s["door"] == 150.0 and "on_call" in config.protected_activities
        for d in decisions:   # each is reproduced by the core from its own record
            again = decide(*wire.replay_inputs(d), model, config)
            assert (again.action, again.person_id) == (d["action"], d["person_id"])
        # nurse-a declined at x0: the re-ask interval keeps them out of the next need
        row = next(r for r in decisions[1]["rationale"] if r["person_id"] == "nurse-a")
        assert row["excluded"] == "reask_interval"
    finally:
        code, err = _stop(node, signal.SIGTERM)
    assert code == 0, err[-2000:]
    assert "Traceback" not in err


def test_ctrl_c_exits_cleanly_without_traceback():
    node = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    import time
    deadline = time.monotonic() + 60
    line = ""
    while time.monotonic() < deadline and "configured" not in line:
        line = node.stderr.readline()
        if not line and node.poll() is not None:
            break
    assert "configured" in line
    code, err = _stop(node, signal.SIGINT)
    assert code == 0 and "Traceback" not in err, err[-2000:]


def test_launch_file_uses_launch_config():
    text = open(os.path.join(HERE, "..", "launch", "helpaware.launch.py")).read()
    assert "launch_config" in text and "lc.EXECUTABLE" in text and "lc.REMAPS" in text
    import helpaware_node.ros.launch_config as mod
    assert "import launch" not in open(mod.__file__).read()
