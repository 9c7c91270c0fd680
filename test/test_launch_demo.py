"""`helpaware demo`: node process from launch_config plus the scenario process, end to end."""
import os
import subprocess
import sys


def test_demo_runs_a_short_night_and_exits_cleanly():
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "demo", "--needs", "8",
                           "--namespace", f"/demo_test_{os.getpid()}"],
                          capture_output=True, text=True, timeout=240)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    out = proc.stdout
    assert "needs 8:" in out                    # every need got a decision
    lines = [x for x in out.splitlines() if x[:2].isdigit() and ":" in x[:5]]
    assert len(lines) == 8 and all(("ask " in x) or ("continue" in x) for x in lines)
    assert "node exited with code 0" in out


def test_core_only_table_still_reachable():
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "demo", "--core-only"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and proc.stdout.strip()
