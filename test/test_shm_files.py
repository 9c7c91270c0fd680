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

"""The shared-memory sweep (helpaware_node/ros/shm_files.py) on files of its own.

Each test builds Fast DDS-named sets in a private folder (never /dev/shm: other test runs share
it) from child processes that hold the `_el` locks the way a participant does (an exclusive
flock for as long as they live), records them, and is then killed with SIGKILL.  The rule
checked is Fast DDS's own (a set whose lock nobody holds is dead), narrowed to recorded files:
only a dead process's set, only the very file recorded (same inode), never one a live process
holds.  test/reliability/test_respawn.py checks the same on a real node in /dev/shm.
"""
import fcntl
import json
import os
import signal
import subprocess
import sys

from helpaware_node.cli import main as cli_main
from helpaware_node.ros import shm_files
import pytest

SEGMENT = "fastdds_0123456789abcdef"
PORT = "fastdds_port7411"
CHILD = r"""
import fcntl, os, sys, time
from pathlib import Path
from helpaware_node.ros import shm_files
shm, records = Path(sys.argv[1]), Path(sys.argv[2])
held = []
for base, size in ((sys.argv[3], 4096), (sys.argv[4], 1024)):
    (shm / base).write_bytes(b"x" * size)
    fd = os.open(shm / (base + "_el"), os.O_CREAT | os.O_RDONLY, 0o644)
    fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    held.append(fd)
(shm / ("sem." + sys.argv[4] + "_mutex")).write_bytes(b"m" * 32)
# open, not locked: a participant probing someone else's port (must not be recorded)
probe = os.open(shm / "fastdds_port7413_el", os.O_CREAT | os.O_RDONLY, 0o644)
print(shm_files.record_own_files(records, shm_dir=shm), flush=True)
sys.stdin.read()
"""


class Child:

    def __init__(self, shm, records, segment=SEGMENT, port=PORT):
        self.proc = subprocess.Popen([sys.executable, "-c", CHILD, str(shm), str(records),
                                      segment, port], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, text=True)
        self.record = self.proc.stdout.readline().strip()
        assert self.record.endswith(f"{self.proc.pid}.json"), self.record

    def kill(self):
        os.kill(self.proc.pid, signal.SIGKILL)
        self.proc.wait(timeout=30)

    def end(self):
        if self.proc.poll() is None:
            self.kill()


@pytest.fixture
def dirs(tmp_path):
    shm, records = tmp_path / "shm", tmp_path / "records"
    shm.mkdir()
    return shm, records


def members():
    return [SEGMENT, SEGMENT + "_el", PORT, PORT + "_el", f"sem.{PORT}_mutex"]


def test_the_record_lists_the_sets_the_process_holds_locked_and_no_other(dirs):
    shm, records = dirs
    child = Child(shm, records)
    try:
        doc = json.loads(open(child.record).read())
        assert set(doc["sets"]) == {SEGMENT + "_el", PORT + "_el"}     # not the probed port
        assert set(doc["sets"][PORT + "_el"]) == {PORT, PORT + "_el", f"sem.{PORT}_mutex"}
        st = os.stat(shm / PORT)
        assert doc["sets"][PORT + "_el"][PORT] == {"dev": st.st_dev, "ino": st.st_ino,
                                                   "size": st.st_size}
        assert doc["pid"] == child.proc.pid
    finally:
        child.end()


def test_a_killed_process_files_are_removed_and_a_running_one_is_left_alone(dirs):
    shm, records = dirs
    child = Child(shm, records)
    try:
        outcome = shm_files.sweep_dead_instances(records)
        assert outcome.removed == [] and len(outcome.live_records) == 1
        assert all((shm / m).exists() for m in members())
        sizes = sum(os.stat(shm / m).st_size for m in members())
        child.kill()
        outcome = shm_files.sweep_dead_instances(records)
    finally:
        child.end()
    assert sorted(outcome.removed) == sorted(str(shm / m) for m in members())
    assert outcome.removed_bytes == sizes == 4096 + 1024 + 32
    assert not any((shm / m).exists() for m in members())
    assert (shm / "fastdds_port7413_el").exists()      # never recorded: not ours to remove
    assert list(records.glob("*.json")) == []           # the dead record is finished


def test_a_set_a_live_process_locked_since_is_left_alone(dirs):
    """A restarted participant takes the dead port again.

    It holds the old `_el` file.
    """
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    taker = subprocess.Popen([sys.executable, "-c", (
        "import fcntl, os, sys; fd = os.open(sys.argv[1], os.O_RDONLY); "
        "fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB); print('locked', flush=True); "
        "sys.stdin.read()"), str(shm / (PORT + "_el"))], stdin=subprocess.PIPE,
        stdout=subprocess.PIPE, text=True)
    try:
        assert taker.stdout.readline().strip() == "locked"
        outcome = shm_files.sweep_dead_instances(records)
    finally:
        taker.kill()
        taker.wait()
    assert outcome.in_use == [PORT + "_el"]
    assert all((shm / m).exists() for m in (PORT, PORT + "_el", f"sem.{PORT}_mutex"))
    assert not (shm / SEGMENT).exists() and not (shm / (SEGMENT + "_el")).exists()


def test_a_file_created_again_since_the_record_is_not_removed(dirs):
    """A writer that reset the dead port made a new file under the same name.

    Not ours.
    """
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    (shm / "incoming").write_bytes(b"new")      # a new file (a new inode) under the old name
    os.replace(shm / "incoming", shm / PORT)
    outcome = shm_files.sweep_dead_instances(records)
    assert (shm / PORT).read_bytes() == b"new"
    assert outcome.replaced == [str(shm / PORT)]
    assert not (shm / (PORT + "_el")).exists() and not (shm / f"sem.{PORT}_mutex").exists()


def test_a_port_whose_lock_file_went_at_a_clean_close_is_removed_too(dirs):
    """Check that a port whose lock file went at a clean close is removed too.

    Fast DDS removes a listener's lock file at a clean close but leaves the port while other
    processes still map it (a killed writer never lets go): the rest of the set goes too, and no
    lock file is left behind.
    """
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    os.unlink(shm / (PORT + "_el"))
    outcome = shm_files.sweep_dead_instances(records)
    assert str(shm / PORT) in outcome.removed and str(shm / f"sem.{PORT}_mutex") in outcome.removed
    assert not any((shm / m).exists() for m in members())


def test_the_claim_holds_the_locks_until_the_files_are_removed(dirs):
    """While claimed, a participant's own non-blocking lock fails, so it takes another port."""
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    claim = shm_files.claim_dead_instances(records)
    fd = os.open(shm / (PORT + "_el"), os.O_RDONLY)
    try:
        with pytest.raises(BlockingIOError):
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        outcome = claim.remove()
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)     # released (on the unlinked file)
    finally:
        os.close(fd)
    assert len(outcome.removed) == 5 and not any((shm / m).exists() for m in members())


def test_a_reused_pid_is_not_taken_for_the_recorded_process(dirs):
    """Same pid, another start time: the recorded process is gone."""
    shm, records = dirs
    for m in members():
        (shm / m).write_bytes(b"z")
    sets = {lock: {m: shm_files._identity(shm / m) for m in shm_files.set_members(lock)}
            for lock in (SEGMENT + "_el", PORT + "_el")}
    records.mkdir()
    me = shm_files.process_start_ticks(os.getpid())
    (records / "1.json").write_text(json.dumps({"pid": os.getpid(), "start_ticks": me - 1,
                                                "boot_id": shm_files.boot_id(),
                                                "shm_dir": str(shm), "sets": sets}))
    (records / "2.json").write_text(json.dumps({"pid": os.getpid(), "start_ticks": me,
                                                "boot_id": shm_files.boot_id(),
                                                "shm_dir": str(shm), "sets": {}}))
    outcome = shm_files.sweep_dead_instances(records)
    assert len(outcome.removed) == 5 and outcome.live_records == ["2.json"]


def test_a_damaged_record_is_named_and_left_alone(dirs, capsys):
    shm, records = dirs
    records.mkdir()
    (records / "9.json").write_text('{"pid": 9, "sets": {"../../etc/passwd": {}}}')
    recs, bad = shm_files.read_records(records)
    assert recs == [] and "9.json" in bad[0] and "sets" in bad[0]
    assert cli_main(["shm-sweep", "--records", str(records)]) == 0
    assert "not a record, left alone: 9.json" in capsys.readouterr().out
    assert (records / "9.json").exists()


def test_the_command_lists_then_removes(dirs, capsys):
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    assert cli_main(["shm-sweep", "--records", str(records), "--dry-run"]) == 0
    out = capsys.readouterr().out
    assert f"pid {child.proc.pid} (gone): 2 set(s)" in out and str(shm / PORT) in out
    assert all((shm / m).exists() for m in members())
    assert cli_main(["shm-sweep", "--records", str(records)]) == 0
    out = capsys.readouterr().out
    assert "removed 5 file(s)" in out and "left by 1 dead instance(s)" in out
    assert not any((shm / m).exists() for m in members())


def test_ports_that_a_live_process_maps_from_removed_files_are_kept_from_a_start(dirs, tmp_path):
    """Check that ports a live process maps from removed files are kept from a start.

    A publisher that still writes into a removed port file would not be heard by a new listener on
    that port number: the start holds such ports until its participant exists.
    """
    shm, records = dirs
    proc = tmp_path / "proc"
    (proc / "4242").mkdir(parents=True)
    (proc / "4242" / "maps").write_text(
        f"7f0000000000-7f0000010000 rw-s 00000000 00:1b 31098   {shm}/{PORT} (deleted)\n"
        f"7f0000010000-7f0000020000 rw-s 00000000 00:1b 31099   {shm}/fastdds_port7413\n"
        f"7f0000020000-7f0000030000 rw-s 00000000 00:1b 31100   {shm}/{SEGMENT} (deleted)\n")
    (proc / "self").mkdir()        # not a pid: skipped
    assert shm_files.stale_port_names(shm, proc) == {PORT}
    claim = shm_files.claim_dead_instances(records, hold_stale_ports=True, shm_dir=shm,
                                           proc=proc)
    assert claim.outcome.ports_avoided == [PORT] and (shm / (PORT + "_el")).exists()
    fd = os.open(shm / (PORT + "_el"), os.O_RDONLY)
    try:
        with pytest.raises(BlockingIOError):       # a starting participant cannot take it
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    finally:
        os.close(fd)
    claim.remove()
    assert not (shm / (PORT + "_el")).exists()     # the lock file made for the hold is gone
    assert not (shm / "fastdds_port7413_el").exists()


def test_a_start_holds_the_dead_files_until_its_participant_is_up(dirs, monkeypatch):
    """StartupSweep: claimed before rclpy starts, removed once the participant exists.

    With HELPAWARE_SHM_PORT_HOLD=0 removed at once and nothing held (the bench's comparison).
    """
    shm, records = dirs
    child = Child(shm, records)
    child.kill()
    start = shm_files.StartupSweep(records)
    assert all((shm / m).exists() for m in members())     # held, not yet removed
    fd = os.open(shm / (PORT + "_el"), os.O_RDONLY)
    try:
        with pytest.raises(BlockingIOError):
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    finally:
        os.close(fd)
    start.participant_up()
    assert not any((shm / m).exists() for m in members())

    child = Child(shm, records)
    child.kill()
    monkeypatch.setenv(shm_files.HOLD_ENV, "0")
    start = shm_files.StartupSweep(records)
    assert start.claim is None and not any((shm / m).exists() for m in members())


REOPENING_CHILD = CHILD.replace("sys.stdin.read()\n", r"""
line = sys.stdin.readline()                    # the middleware opens its port again
os.close(held.pop())
(shm / (sys.argv[4] + "_el")).unlink()
(shm / "incoming").write_bytes(b"y" * 2048)
os.replace(shm / "incoming", shm / sys.argv[4])
fd = os.open(shm / (sys.argv[4] + "_el"), os.O_CREAT | os.O_RDONLY, 0o644)
fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
if line.strip() == "refresh":                  # what a clean exit does before shutdown
    shm_files.record_own_files(records, shm_dir=shm, keep_recorded=True)
print("reopened", flush=True)
sys.stdin.read()
""")


@pytest.mark.parametrize("refresh", [True, False])
def test_a_port_opened_again_during_the_run_is_removed_once_the_record_is_brought_up_to_date(
        dirs, refresh):
    shm, records = dirs
    proc = subprocess.Popen([sys.executable, "-c", REOPENING_CHILD, str(shm), str(records),
                             SEGMENT, PORT], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                            text=True)
    try:
        assert proc.stdout.readline().strip().endswith(f"{proc.pid}.json")
        proc.stdin.write("refresh\n" if refresh else "keep\n")
        proc.stdin.flush()
        assert proc.stdout.readline().strip() == "reopened"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=30)
        outcome = shm_files.sweep_dead_instances(records)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert not (shm / SEGMENT).exists()              # the set recorded at the start goes
    if refresh:
        assert not (shm / PORT).exists() and not (shm / (PORT + "_el")).exists()
        assert outcome.replaced == []
    else:        # the start's record knew the old files only: the new set is left alone
        assert (shm / PORT).exists() and (shm / (PORT + "_el")).exists()
