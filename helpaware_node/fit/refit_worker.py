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

"""A process beside the node that runs site-learning refits (fit.online.RefitJob).

A refit is seconds of numpy and Python; in a thread of the node it shares the interpreter
lock with the executor, and decisions then waited up to about 70 ms behind it (and the
refit ran several times slower): bench/bench_learning.py, part 4. In a process of its own it
shares nothing. The process is started once with the "spawn" method (a fork of a process
that runs middleware threads is unsafe), kept for the node's life, and given one job at a
time over a pipe: the store's reader (a picklable path, or copied events) and the job. The
caller polls for the result without blocking. The worker runs at a lower CPU priority (nice
10), so on a busy machine the node's executor gets the CPU first, with one BLAS thread
(OPENBLAS_NUM_THREADS, OMP_NUM_THREADS, MKL_NUM_THREADS set to 1 in its environment unless the
user set them): L-BFGS-B's small products run about twice as slow threaded on two cores, and
a threaded refit would take the executor's core too. No ROS here.
"""
from __future__ import annotations

import contextlib
import multiprocessing
import os
import threading
from typing import Any, Iterator, Mapping, Optional

NICENESS = 10      # a refit is background work: the node's own threads get the CPU first
# read by OpenBLAS, OpenMP and MKL when numpy loads them: in the spawned worker, before then
BLAS_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
_START_LOCK = threading.Lock()     # one worker started at a time (the environment is shared)


def worker_environment(environ: Mapping[str, str]) -> dict[str, str]:
    """Return what the worker's environment adds to `environ`: one BLAS thread, where not set."""
    return {name: "1" for name in BLAS_THREAD_VARS if not environ.get(name)}


@contextlib.contextmanager
def _started_with(extra: Mapping[str, str]) -> Iterator[None]:
    """`extra` in os.environ while a child is started ("spawn" copies the environment then).

    The node's own BLAS was loaded long before, so its thread count does not change.
    """
    with _START_LOCK:
        before = {name: os.environ.get(name) for name in extra}   # "" is kept as it was
        os.environ.update(extra)
        try:
            yield
        finally:
            for name, value in before.items():
                if value is None:
                    os.environ.pop(name, None)
                else:
                    os.environ[name] = value


class BlasProbe:
    """A job that reports the BLAS thread settings the worker runs with (tests)."""

    def run(self, outcomes, asks) -> dict[str, Optional[str]]:
        return {name: os.environ.get(name) for name in BLAS_THREAD_VARS}


def serve(conn) -> None:
    """Run the worker's loop: (reader, job) in, ("ok", Refit) or ("error", text) out."""
    try:
        os.nice(NICENESS)
    except (AttributeError, OSError):     # not on this platform: the same, at equal priority
        pass
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            return                  # the node went away
        if msg is None:
            return
        reader, job = msg
        try:
            outcomes, asks = reader()
            reply: tuple[str, Any] = ("ok", job.run(outcomes, asks))
        except Exception as exc:  # noqa: BLE001 - reported to the node, the worker lives on
            reply = ("error", f"{type(exc).__name__}: {exc}"[:300])
        try:
            conn.send(reply)
        except (BrokenPipeError, OSError):
            return


class RefitWorker:
    """One worker process; `submit` a job, `poll` for its result, `stop` at the end."""

    def __init__(self) -> None:
        ctx = multiprocessing.get_context("spawn")
        self._conn, child = ctx.Pipe()
        self._proc = ctx.Process(target=serve, args=(child,), daemon=True,
                                 name="helpaware_refit")
        with _started_with(worker_environment(os.environ)):
            self._proc.start()
        child.close()
        self.busy = False

    @property
    def alive(self) -> bool:
        return self._proc.is_alive()

    def submit(self, reader, job) -> None:
        self._conn.send((reader, job))
        self.busy = True

    def poll(self) -> Optional[tuple[str, Any]]:
        """Return the finished job's reply, or None while it runs.

        Raises EOFError when the worker died meanwhile.
        """
        if not self.busy:
            return None
        if self._conn.poll():
            self.busy = False
            return self._conn.recv()
        if not self._proc.is_alive():
            self.busy = False
            raise EOFError(f"refit worker exited (code {self._proc.exitcode})")
        return None

    def stop(self, timeout_s: float = 2.0) -> None:
        """Ask the worker to stop.

        a refit still running is ended (its result is not needed: nothing changed yet).
        """
        try:
            if not self.busy:
                self._conn.send(None)
        except (BrokenPipeError, OSError):
            pass
        self._proc.join(timeout=0.0 if self.busy else timeout_s)
        if self._proc.is_alive():
            self._proc.terminate()
            self._proc.join(timeout=timeout_s)
        self._conn.close()
