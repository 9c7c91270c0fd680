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

"""The Fast DDS shared-memory files of this node's processes, and the ones a killed instance left.

Fast DDS (under rmw_fastrtps_cpp) gives every participant, in /dev/shm:
- a data segment `fastdds_<16 hex>` (about 0.5 MB) with its lock file `fastdds_<16 hex>_el`;
- listening ports `fastdds_port<N>` (about 50 kB) with `fastdds_port<N>_el` and the port mutex
  `sem.fastdds_port<N>_mutex`.
The owner holds an exclusive flock on each `_el` file for as long as it lives.  A SIGKILLed
process loses its locks (the kernel closes its files), but nothing removes the files: about
0.65 MB per kill.  Fast DDS's own rule for a dead set is "its `_el` lock is free"; its cleaner
(`fastdds shm clean`, in <prefix>/tools/fastdds of the wheels) applies the rule to every set on
the machine, lets go of the lock before it deletes, and its command does not start in a venv
without psutil.  This module applies the same rule, more narrowly:

1. `record_own_files()` (the node, once its participant exists) writes which sets this process
   holds locked (name, device, inode, size) to `<ROS_HOME>/helpaware/shm_owners/<pid>.json`,
   with the process start time, so a reused pid is not taken for the same process.
2. `claim_dead_instances()` (the next start, or `helpaware shm-sweep`) reads the records of
   processes that are gone and takes the `_el` lock of each of their sets that is still the
   recorded file (same device and inode: a port that another participant re-created since is
   a new file, and not ours; tmpfs numbers its inodes from a counter, so a number is not given
   to a second file while the machine runs) and that nobody holds.  A set whose lock a live
   process holds is left alone.
3. `Claim.remove()` unlinks the claimed files while their locks are held, so a participant that
   starts at that moment fails its own non-blocking lock and takes another port.  The start-up
   holds the claim until the node's participant exists, so the new participant does not take
   the dead instance's port numbers, whose old files the long-lived publishers still have
   mapped; it holds as well every port that a live process maps from a removed file
   (`stale_port_names`): a listener there would not hear that process (docs/integration.md,
   "Respawn").
No rclpy import: the files, locks and /proc only.  Linux only (elsewhere nothing is recorded).
"""
from __future__ import annotations

from dataclasses import dataclass, field
import errno
import fcntl
import json
import os
from pathlib import Path
import re
import time
from typing import Optional

SHM_DIR = Path("/dev/shm")
RECORD_DIR_NAME = "shm_owners"
HOLD_ENV = "HELPAWARE_SHM_PORT_HOLD"   # "0": remove before the start, hold no port (diagnosis)
SEGMENT_LOCK_RE = re.compile(r"^fastdds_[0-9a-f]{16}_el$")
PORT_LOCK_RE = re.compile(r"^fastdds_port\d{1,5}_el$")
PORT_RE = re.compile(r"^fastdds_port\d{1,5}$")


def records_dir() -> Path:
    """<ROS_HOME or ~/.ros>/helpaware/shm_owners: per user, like the default store."""
    from ..store.keys import default_store_dir
    return default_store_dir() / RECORD_DIR_NAME


def is_fastdds_lock(name: str) -> bool:
    return bool(SEGMENT_LOCK_RE.match(name) or PORT_LOCK_RE.match(name))


def set_members(lock_name: str) -> list[str]:
    """Return the files of one set, given its `_el` lock file.

    Data or port file, lock, port mutex.
    """
    base = lock_name[:-len("_el")]
    members = [base, lock_name]
    if PORT_LOCK_RE.match(lock_name):
        members.append(f"sem.{base}_mutex")
    return members


def process_start_ticks(pid: int) -> Optional[int]:
    """Field 22 of /proc/<pid>/stat (start time in clock ticks since boot); None: no process."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii", errors="replace") as fh:
            return int(fh.read().rsplit(")", 1)[1].split()[19])
    except (OSError, IndexError, ValueError):
        return None


def boot_id() -> str:
    try:
        with open("/proc/sys/kernel/random/boot_id", encoding="ascii") as fh:
            return fh.read().strip()
    except OSError:
        return ""


def locked_inodes(pid: int) -> Optional[set[int]]:
    """Inodes on which `pid` holds a flock (from /proc/locks); None when it cannot be read."""
    try:
        with open("/proc/locks", encoding="ascii", errors="replace") as fh:
            lines = fh.read().splitlines()
    except OSError:
        return None
    out = set()
    for line in lines:
        parts = line.split()
        # "1: FLOCK  ADVISORY  WRITE 12181 00:1b:31098 0 EOF"
        if len(parts) >= 6 and parts[1] == "FLOCK" and parts[4] == str(pid):
            try:
                out.add(int(parts[5].rsplit(":", 1)[1]))
            except ValueError:
                continue
    return out


def held_lock_names(pid: int, shm_dir: Path = SHM_DIR) -> list[str]:
    """Return the Fast DDS `_el` files that process `pid` has open and holds locked."""
    prefix = str(shm_dir) + "/"
    names = {}
    try:
        fds = os.listdir(f"/proc/{pid}/fd")
    except OSError:
        return []
    for fd in fds:
        try:
            target = os.readlink(f"/proc/{pid}/fd/{fd}")
        except OSError:
            continue
        if target.startswith(prefix) and is_fastdds_lock(target[len(prefix):]):
            try:
                names[target[len(prefix):]] = os.stat(target).st_ino
            except OSError:
                continue
    locked = locked_inodes(pid)
    return sorted(n for n, ino in names.items() if locked is None or ino in locked)


def _identity(path: Path) -> Optional[dict]:
    try:
        st = os.lstat(path)
    except OSError:
        return None
    return {"dev": st.st_dev, "ino": st.st_ino, "size": st.st_size}


def record_own_files(directory: Optional[Path] = None, shm_dir: Path = SHM_DIR,
                     pid: Optional[int] = None, keep_recorded: bool = False) -> Optional[Path]:
    """Write the record of this process's sets (after its participant exists).

    Its path, or None when there is nothing to record (no /dev/shm, no Fast DDS shared memory).
    `keep_recorded`: add to this process's earlier record instead of replacing it (the middleware
    may open a port file again during a run, so the record is brought up to date before a clean
    exit; the sets recorded earlier stay, a set taken again is updated).
    """
    pid = os.getpid() if pid is None else pid
    directory = records_dir() if directory is None else Path(directory)
    sets = {}
    if keep_recorded:
        try:
            earlier = json.loads((directory / f"{pid}.json").read_text(encoding="utf-8"))
            sets.update(earlier.get("sets", {}))
        except (OSError, ValueError, AttributeError):
            pass
    for lock in held_lock_names(pid, shm_dir):
        files = {m: _identity(shm_dir / m) for m in set_members(lock)}
        sets[lock] = {m: ident for m, ident in files.items() if ident is not None}
    if not sets:
        return None
    doc = {"pid": pid, "start_ticks": process_start_ticks(pid), "boot_id": boot_id(),
           "shm_dir": str(shm_dir), "sets": sets}
    directory.mkdir(parents=True, exist_ok=True)
    path = directory / f"{pid}.json"
    tmp = directory / f".{pid}.json.tmp"
    tmp.write_text(json.dumps(doc, indent=1), encoding="utf-8")
    os.replace(tmp, path)
    return path


@dataclass
class Record:
    path: Path
    pid: int
    start_ticks: Optional[int]
    boot_id: str
    shm_dir: Path
    sets: dict          # lock name -> {member name: {"dev", "ino", "size"}}

    @property
    def alive(self) -> bool:
        """Return the recorded process still runs (same pid, same start time, same boot)."""
        if self.boot_id and self.boot_id != boot_id():
            return False
        now = process_start_ticks(self.pid)
        return now is not None and (self.start_ticks is None or now == self.start_ticks)


def read_records(directory: Optional[Path] = None) -> tuple[list[Record], list[str]]:
    """Every record, and the reasons for files that are not records (left alone)."""
    directory = records_dir() if directory is None else Path(directory)
    records, bad = [], []
    try:
        paths = sorted(directory.glob("*.json"))
    except OSError:
        return [], []
    for path in paths:
        try:
            doc = json.loads(path.read_text(encoding="utf-8"))
            sets = doc["sets"]
            if not isinstance(sets, dict) or not all(is_fastdds_lock(k) for k in sets):
                raise ValueError("sets: not a map of Fast DDS lock file names")
            records.append(Record(path, int(doc["pid"]), doc.get("start_ticks"),
                                  str(doc.get("boot_id", "")), Path(doc.get("shm_dir", SHM_DIR)),
                                  sets))
        except (OSError, ValueError, KeyError, TypeError) as exc:
            bad.append(f"{path.name}: {exc}")
    return records, bad


@dataclass
class ClaimedSet:
    shm_dir: Path
    lock_name: str
    fd: int                      # open on the `_el` file, holding its flock
    members: dict                # member name -> recorded identity


@dataclass
class Outcome:
    """What a sweep did, per set (for the command's output and the log)."""

    removed: list[str] = field(default_factory=list)       # file paths
    removed_bytes: int = 0
    in_use: list[str] = field(default_factory=list)        # sets a live process holds
    replaced: list[str] = field(default_factory=list)      # paths re-created by someone else
    records_done: list[str] = field(default_factory=list)  # records of dead processes finished
    live_records: list[str] = field(default_factory=list)  # records of running processes
    ports_avoided: list[str] = field(default_factory=list)  # stale-mapped ports held at a start

    def summary(self) -> str:
        avoided = (f"; kept off {len(self.ports_avoided)} port(s) that live processes still map "
                   f"from removed files" if self.ports_avoided else "")
        return (f"removed {len(self.removed)} file(s), {self.removed_bytes / 1e6:.2f} MB, left by "
                f"{len(self.records_done)} dead instance(s); {len(self.in_use)} set(s) in use by "
                f"a live process left alone; {len(self.live_records)} running instance(s)"
                + avoided)


@dataclass
class PortHold:
    """A port number kept from the starting participant: the lock of `fastdds_port<N>_el`."""

    path: Path
    fd: int
    made: bool              # the lock file did not exist: made here, removed on release

    def release(self) -> None:
        try:
            if self.made:
                st = os.fstat(self.fd)
                now = _identity(self.path)
                if now is not None and (now["dev"], now["ino"]) == (st.st_dev, st.st_ino):
                    os.unlink(self.path)
        except OSError:
            pass
        finally:
            os.close(self.fd)


@dataclass
class Claim:
    """The locks of the dead instances' sets, held until `remove()` (or `release()`).

    Of the ports with stale mappings (`stale_port_names`), held until then too.
    """

    sets: list[ClaimedSet]
    records: list[Record]
    outcome: Outcome
    holds: list[PortHold] = field(default_factory=list)

    def remove(self) -> Outcome:
        """Unlink every claimed file that is still the recorded one.

        Then let go of the locks and delete the records of the dead processes.
        """
        for claimed in self.sets:
            try:
                for name, ident in claimed.members.items():
                    if name == claimed.lock_name:
                        continue
                    self._unlink_if_same(claimed.shm_dir / name, ident)
                # the lock file last, and only if the name still leads to the file we lock
                st = os.fstat(claimed.fd)
                self._unlink_if_same(claimed.shm_dir / claimed.lock_name,
                                     {"dev": st.st_dev, "ino": st.st_ino, "size": st.st_size})
            finally:
                os.close(claimed.fd)
        self.sets = []
        for rec in self.records:
            try:
                os.unlink(rec.path)
            except OSError:
                pass
            self.outcome.records_done.append(rec.path.name)
        self.records = []
        self._let_go_of_ports()
        return self.outcome

    def release(self) -> None:
        """Let go of the locks without removing anything (the records stay for next time)."""
        for claimed in self.sets:
            os.close(claimed.fd)
        self.sets, self.records = [], []
        self._let_go_of_ports()

    def _let_go_of_ports(self) -> None:
        for hold in self.holds:
            hold.release()
        self.holds = []

    def _unlink_if_same(self, path: Path, ident: dict) -> None:
        name = str(path)
        now = _identity(path)
        if now is None:
            return
        if (now["dev"], now["ino"]) != (ident.get("dev"), ident.get("ino")):
            self.outcome.replaced.append(name)
            return
        try:
            os.unlink(path)
        except OSError as exc:
            if exc.errno != errno.ENOENT:
                self.outcome.replaced.append(f"{name} ({exc.strerror})")
            return
        self.outcome.removed.append(name)
        self.outcome.removed_bytes += int(now["size"])


def claim_dead_instances(directory: Optional[Path] = None,
                         also_pid: Optional[int] = None, hold_stale_ports: bool = False,
                         shm_dir: Path = SHM_DIR, proc: Path = Path("/proc")) -> Claim:
    """Lock the sets that dead instances recorded and nobody holds (see the module text).

    `also_pid`: take that process's record as finished too (this process, at its clean exit, after
    its participant is gone: ports other processes still map outlive their owner).
    `hold_stale_ports`: also keep every port in `shm_dir` that a live process has mapped from a
    removed file (a participant about to start must not listen there; `stale_port_names`).
    """
    records, _ = read_records(directory)
    outcome = Outcome()
    claimed, dead = [], []
    for rec in records:
        if rec.pid != also_pid and rec.alive:
            outcome.live_records.append(rec.path.name)
            continue
        dead.append(rec)
        for lock_name, members in rec.sets.items():
            got = _lock_if_same(rec.shm_dir / lock_name, members.get(lock_name))
            if got is None:
                continue
            if got < 0:
                outcome.in_use.append(lock_name)
                continue
            claimed.append(ClaimedSet(rec.shm_dir, lock_name, got, members))
    claim = Claim(claimed, dead, outcome)
    if hold_stale_ports:
        taken = {c.shm_dir / c.lock_name for c in claimed}
        for name in sorted(stale_port_names(shm_dir, proc)):
            path = shm_dir / f"{name}_el"
            if path not in taken:
                hold = _hold_port(path)
                if hold is not None:
                    claim.holds.append(hold)
                    outcome.ports_avoided.append(name)
    return claim


def stale_port_names(shm_dir: Path = SHM_DIR, proc: Path = Path("/proc")) -> set[str]:
    """Return the ports that a live process still maps from a removed file.

    Ports (`fastdds_port<N>`) that some live process still has mapped from a file that was removed:
    a publisher of a participant that died and whose port was removed or reset since. It writes
    into that old mapping until its middleware notices (or, when the dead listener was not waiting,
    perhaps never), so a new listener on port N would not hear it.  Read from /proc/<pid>/maps of
    every process this user may read.
    """
    prefix = f"{shm_dir}/fastdds_port"
    names: set[str] = set()
    try:
        pids = [p for p in os.listdir(proc) if p.isdigit()]
    except OSError:
        return names
    for pid in pids:
        try:
            with open(proc / pid / "maps", encoding="utf-8", errors="replace") as fh:
                for line in fh:
                    if prefix in line and line.rstrip().endswith("(deleted)"):
                        path = line.split(None, 5)[5].rsplit(" (deleted)", 1)[0].strip()
                        name = os.path.basename(path)
                        if PORT_RE.match(name):
                            names.add(name)
        except (OSError, IndexError):
            continue
    return names


def _open_lock_file(path: Path) -> Optional[tuple[int, bool]]:
    """(fd, made): the lock file opened.

    Or made (O_EXCL) when it is missing, as a listener does; None when it cannot be opened, or
    someone else made it first.
    """
    try:
        return os.open(path, os.O_RDONLY | os.O_NOFOLLOW | os.O_CLOEXEC), False
    except FileNotFoundError:
        try:
            return os.open(path, os.O_RDONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW
                           | os.O_CLOEXEC, 0o644), True
        except OSError:
            return None
    except OSError:
        return None


def _hold_port(path: Path) -> Optional[PortHold]:
    """Take the lock of a port's `_el` file (made if missing); None if a listener has it."""
    opened = _open_lock_file(path)
    if opened is None:
        return None
    fd, made = opened
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        return None
    return PortHold(path, fd, made)


def _lock_if_same(path: Path, ident: Optional[dict]) -> Optional[int]:
    """Return an fd holding the exclusive flock of `path` if it is the recorded file and free.

    -1 if a live process holds it; None if another file has the name now.  A lock file that is gone
    (Fast DDS removes it at a clean close, and leaves the port itself while other processes still
    map it) is made again and locked, as a listener would, so the rest of the set can go without a
    participant taking the port meanwhile.
    """
    opened = _open_lock_file(path) if ident is not None else None
    if opened is None or ident is None:
        return None               # not recorded, or someone made it first: theirs, not ours
    fd, made = opened
    try:
        st = os.fstat(fd)
        if not made and (st.st_dev, st.st_ino) != (ident.get("dev"), ident.get("ino")):
            os.close(fd)
            return None
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        return -1
    return fd


def remove_own_files(directory: Optional[Path] = None, attempts: int = 5,
                     pause_s: float = 0.1) -> Outcome:
    """At a clean exit, after the participant is gone.

    This process's sets and those of dead instances. The middleware's own threads may let go of a
    lock a moment after the context is shut down, so a set still locked is tried again a few times
    before it is left for the next start's sweep.
    """
    outcome = claim_dead_instances(directory, also_pid=os.getpid()).remove()
    for _ in range(attempts - 1):
        if not outcome.in_use:
            break
        time.sleep(pause_s)
        outcome = claim_dead_instances(directory, also_pid=os.getpid()).remove()
    return outcome


def sweep_dead_instances(directory: Optional[Path] = None) -> Outcome:
    """Claim and remove at once (the command; a start-up holds the claim instead)."""
    return claim_dead_instances(directory).remove()


class StartupSweep:
    """The node process's part (four calls in `main()`).

    Claim the dead instances' sets before rclpy starts, remove them and record this process's own
    once the participant exists, bring the record up to date before shutdown, and at the end remove
    what this process itself left (its participant is gone by then).
    """

    def __init__(self, directory: Optional[Path] = None) -> None:
        self.directory = records_dir() if directory is None else Path(directory)
        hold = os.environ.get(HOLD_ENV, "1") != "0"
        try:
            self.claim: Optional[Claim] = claim_dead_instances(self.directory,
                                                               hold_stale_ports=hold)
            if not hold:        # removed before the participant starts: nothing is held
                self.claim.remove()
                self.claim = None
        except Exception:  # noqa: BLE001 - a sweep must never stop the node from starting
            self.claim = None

    def participant_up(self, logger=None) -> None:
        try:
            outcome = self.claim.remove() if self.claim is not None else Outcome()
            self.claim = None
            record_own_files(self.directory)
        except Exception as exc:  # noqa: BLE001 - report, never stop the node over it
            if logger is not None:
                logger.warning(f"shared-memory record not written: {exc}")
            return
        if logger is not None and (outcome.removed or outcome.in_use or outcome.ports_avoided):
            logger.info(f"shared memory of killed instances: {outcome.summary()}")

    def before_shutdown(self) -> None:
        """Bring this process's record up to date while its participant still exists."""
        try:
            record_own_files(self.directory, keep_recorded=True)
        except Exception:  # noqa: BLE001 - exiting anyway; the record of the start remains
            pass

    def finish(self) -> None:
        try:
            if self.claim is not None:     # the node never came up: what was claimed goes now
                self.claim.remove()
                self.claim = None
            remove_own_files(self.directory)
        except Exception:  # noqa: BLE001 - exiting anyway; the next start sweeps again
            pass
