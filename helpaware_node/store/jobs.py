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

"""The store's long writes (forget, opt-out, compaction) on a worker thread of their own.

On a store of a million events a forget or a compaction takes from milliseconds to
seconds; run on the ROS executor, every callback would wait that long.  Here the caller's
thread only puts the change in force in memory (store.begin_forget / begin_opt_out: every
read and decision respects it at once) and queues the job; the worker writes the rows on
its own connection (same pragmas, store.worker_connection), and `poll()`, called back on
the caller's thread (the node: a guard condition the worker triggers), ends the forget in
memory and runs each job's `on_done` there.  A store without a worker connection (the
MemoryStore) runs each job at once; its `on_done` still comes from poll().

A retention given when the store was opened (SqliteStore retention_days) is queued when the
jobs are made, so opening a big store never waits for it.

No ROS here: the node wires the wake-up (ros/node_entities.py).
"""
from __future__ import annotations

from collections import deque
from dataclasses import dataclass
import queue
import sqlite3
import threading
import time
from typing import Any, Callable, Optional

COMPACT_KEYS_PER_COMMIT = 50    # people per commit at most ...
COMPACT_TX_S = 0.002            # ... and a commit once the work has taken this long: an append
#                                 waits for about this and one commit's sync (store._write_gate)
COMPACT_PAUSE_S = 0.002         # between commits: the disk and CPUs free for the callbacks


@dataclass
class StoreJob:
    kind: str                           # "forget" | "opt_out" | "compact"
    args: tuple[Any, ...]
    on_done: Optional[Callable[["StoreJob"], None]] = None
    result: Any = None                  # forget: events removed; compact: events compacted
    error: Optional[BaseException] = None
    elapsed_s: float = 0.0              # on the worker
    done: bool = False


class StoreJobs:
    """Queue of the store's long writes; one worker thread, started on the first job."""

    def __init__(self, store: Any, wake: Optional[Callable[[], None]] = None) -> None:
        self._store = store
        self._wake = wake                   # called on the worker after each job (thread-safe)
        self.threaded = hasattr(store, "worker_connection")
        self._todo: queue.SimpleQueue[Optional[StoreJob]] = queue.SimpleQueue()
        self._done: deque[StoreJob] = deque()
        self._lock = threading.Lock()
        self._idle = threading.Condition(self._lock)
        self._unfinished = 0
        self._thread: Optional[threading.Thread] = None
        self.failures = 0
        self.completed = 0
        # a retention given at open (SqliteStore retention_days) runs here, not in the opener
        if getattr(store, "retention_s", 0.0) > 0 and self.threaded:
            self.compact(store.retention_s, on_done=lambda job: store.end_retention())

    # -- the caller's thread ------------------------------------------------------------
    def forget(self, key: str, on_done: Optional[Callable[[StoreJob], None]] = None) -> StoreJob:
        if hasattr(self._store, "begin_forget"):
            self._store.begin_forget(key)       # every read forgets the person from now on
        return self._submit(StoreJob("forget", (key,), on_done))

    def opt_out(self, key: str, on_done: Optional[Callable[[StoreJob], None]] = None) -> StoreJob:
        if hasattr(self._store, "begin_opt_out"):
            self._store.begin_opt_out(key)      # no append or decision uses them from now on
        return self._submit(StoreJob("opt_out", (key,), on_done))

    def compact(self, older_than_s: float, now_s: Optional[float] = None,
                on_done: Optional[Callable[[StoreJob], None]] = None) -> StoreJob:
        return self._submit(StoreJob("compact", (older_than_s, now_s), on_done))

    @property
    def pending(self) -> int:
        """Jobs queued or running, and finished ones not yet polled."""
        with self._lock:
            return self._unfinished + len(self._done)

    def poll(self) -> list[StoreJob]:
        """Finish the jobs the worker has done: end forgets in memory, run on_done (here)."""
        out = []
        while True:
            with self._lock:
                if not self._done:
                    break
                job = self._done.popleft()
            if job.kind == "forget" and hasattr(self._store, "end_forget"):
                self._store.end_forget(job.args[0])
            out.append(job)
            if job.on_done is not None:
                job.on_done(job)
        return out

    def wait(self, timeout_s: float = 60.0) -> bool:
        """Until the worker has nothing left (tests, shutdown); then poll(). False on time-out."""
        end = time.monotonic() + timeout_s
        with self._idle:
            while self._unfinished:
                left = end - time.monotonic()
                if left <= 0:
                    return False
                self._idle.wait(left)
        self.poll()
        return True

    def close(self, timeout_s: float = 60.0) -> bool:
        """Finish what was queued (a forget asked for is done before the node stops)."""
        finished = self.wait(timeout_s)
        thread, self._thread = self._thread, None
        if thread is not None:
            self._todo.put(None)
            thread.join(timeout_s)
        return finished

    def _submit(self, job: StoreJob) -> StoreJob:
        with self._lock:
            self._unfinished += 1
        if not self.threaded:
            self._run(job, None)
            return job
        if self._thread is None:
            self._thread = threading.Thread(target=self._worker, name="store-jobs", daemon=True)
            self._thread.start()
        self._todo.put(job)
        return job

    # -- the worker thread ----------------------------------------------------------------
    def _worker(self) -> None:
        # at the executor's priority, not niced: it holds the store's write gate for its short
        # transactions, and a niced holder descheduled by other processes kept appends waiting
        # (bench_store, longest append during a compaction: 48 ms at nice 10, 17 ms at 0); it
        # yields by pausing between transactions (COMPACT_PAUSE_S)
        conn = None
        try:
            while True:
                job = self._todo.get()
                if job is None:
                    return
                if conn is None:
                    try:
                        conn = self._store.worker_connection()
                    except Exception as exc:  # noqa: BLE001 - reported with the job
                        job.error = exc
                        self._finish(job)
                        continue
                self._run(job, conn)
        finally:
            if conn is not None:
                conn.close()

    def _run(self, job: StoreJob, conn: Optional[sqlite3.Connection]) -> None:
        t0 = time.perf_counter()
        try:
            job.result = self._execute(job, conn)
        except Exception as exc:  # noqa: BLE001 - reported to the caller's thread
            job.error = exc
        job.elapsed_s = time.perf_counter() - t0
        self._finish(job)

    def _execute(self, job: StoreJob, conn: Optional[sqlite3.Connection]) -> Any:
        s = self._store
        if conn is None:                    # a store without a worker connection: its own calls
            if job.kind == "forget":
                return s.forget(*job.args)
            if job.kind == "opt_out":
                return s.opt_out(*job.args)
            return s.compact(*job.args) if hasattr(s, "compact") else 0
        if job.kind == "forget":
            return s.forget_rows(conn, *job.args)
        if job.kind == "opt_out":
            return s.opt_out_rows(conn, *job.args)
        return s.compact_rows(conn, *job.args, keys_per_commit=COMPACT_KEYS_PER_COMMIT,
                              pause_s=COMPACT_PAUSE_S, max_tx_s=COMPACT_TX_S)

    def _finish(self, job: StoreJob) -> None:
        job.done = True
        with self._idle:
            self._unfinished -= 1
            self.completed += 1
            self.failures += job.error is not None
            self._done.append(job)
            self._idle.notify_all()
        if self._wake is not None:
            try:
                self._wake()
            except Exception:  # noqa: BLE001 - the node is stopping; poll() at close
                pass
