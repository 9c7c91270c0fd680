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

"""The node's periodic and worker-driven upkeep, off the input path.

Each housekeeping period: outcomes the store refused are retried (store_retry.py), a site refit
that finished in its worker is put in force (site_learning.py) and the help session's clock
ticks (asks that expired, needs that wait). Store jobs (forget, opt-out, compaction: store/jobs.py)
report back through a guard condition; at stop the jobs asked for are written before the store
closes. A failure is contained, counted (housekeeping_errors) and logged, bounded by kind.
"""
from __future__ import annotations

from .refusal_log import exception_text


class Housekeeping:
    """The housekeeping timer and the store jobs' reports of a HelpAwareNode."""

    def __init__(self, node) -> None:
        self._node = node

    def run(self) -> None:
        node = self._node
        try:
            assert node.held is not None and node.learning is not None   # made at configure
            node.held.retry()
            now = node._read_clock()
            learned = node.learning.poll(now)      # a refit finished in its worker: in force now
            if learned is not None:
                node._use_model(learned)
            node._apply(node.session.tick(now))
        except Exception as exc:  # noqa: BLE001 - state an input left must not stop the timer
            self._contained("housekeeping_error", f"housekeeping failed "
                            f"({exception_text(exc)}); tried again next period")

    def store_jobs_done(self) -> None:
        """Run the reports of store jobs the worker finished (answers to requests)."""
        try:
            if self._node.store_jobs is not None:
                self._node.store_jobs.poll()
        except Exception as exc:  # noqa: BLE001 - a report must not stop the executor
            self._contained("store_job_error", f"store job report failed "
                            f"({exception_text(exc)})")

    def finish_store_jobs(self) -> None:
        """Write a forget or opt-out asked for before the store closes."""
        node = self._node
        jobs, node.store_jobs = getattr(node, "store_jobs", None), None
        if jobs is not None:
            try:
                if not jobs.close():
                    node.get_logger().error("store jobs still running at stop")
            except Exception:  # noqa: BLE001 - stopping: the store closes next
                pass

    def _contained(self, kind: str, text: str) -> None:
        node = self._node
        node.counters.housekeeping_errors += 1
        line = node.log_lines.due(kind, text)
        if line is not None:
            node.get_logger().error(line)
