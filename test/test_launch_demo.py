"""`helpaware demo`: node process from launch_config plus the scenario process, end to end."""
import os
import re
import subprocess
import sys


def test_demo_runs_a_short_night_and_keeps_its_store(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "demo", "--needs", "8",
                           "--namespace", f"/demo_test_{os.getpid()}"],
                          capture_output=True, text=True, timeout=240, cwd=str(tmp_path))
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    out = proc.stdout
    assert "needs 8:" in out, out[-3000:]       # every need got a decision
    lines = [x for x in out.splitlines() if x[:2].isdigit() and ":" in x[:5]]
    assert len(lines) == 8 and all(("ask " in x) or ("continue" in x) for x in lines)
    assert "node exited with code 0" in out
    # the store stays beside the bag and the report, and holds every answered ask
    demo = tmp_path / "out" / "demo"
    assert {"beliefs.sqlite3", "site_key", "night_shift_bag", "review"} <= set(os.listdir(demo))
    counts = dict((k, int(v)) for k, v in re.findall(
        r"(helped|declined|no response|could not ask) (\d+)",
        next(x for x in out.splitlines() if x.startswith("needs 8:"))))
    inspect = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "store", "--path",
                              "out/demo/beliefs.sqlite3", "inspect"], cwd=str(tmp_path),
                             capture_output=True, text=True, timeout=60)
    assert inspect.returncode == 0, inspect.stderr
    events = int(re.search(r"^events\s+(\d+)$", inspect.stdout, re.MULTILINE).group(1))
    # could-not-ask changes no belief and is not stored
    assert events == counts["helped"] + counts["declined"] + counts["no response"]
    assert "helpaware store --path out/demo/beliefs.sqlite3 inspect" in out


def test_core_only_table_still_reachable():
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "demo", "--core-only"],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and proc.stdout.strip()
