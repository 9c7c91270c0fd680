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

"""Site learning on the node: refits in a worker process, results applied on the executor.

`NodeLearning.poll(now_s)` runs on the executor (the housekeeping timer). When a refit is due
(fit.online.SiteLearner.due) it hands the store's `learning_reader()` and the learner's job
(plain values) to a worker process (fit/refit_worker.py: the fit shares no interpreter lock
with the executor); the reader opens its own read-only connection there (SQLite), so neither
the read nor the fit holds the node's connection or its lock, and deciding never waits for
either. Where a process cannot be started the refit runs in a thread instead (said once in the
log). A finished refit is picked up by the next poll, on the executor: logged (old -> new,
outcomes), kept in the store's history first (a revision the store refuses is not put in
force), then recorded by the learner and returned for the node to put in force. Propose mode
writes a parameter file instead.
"""
from __future__ import annotations

import concurrent.futures
from dataclasses import replace
import datetime
import os
import time
from typing import Optional

from ..core.model import SiteModel
from ..fit.online import LEARNED, LearningSettings, NUISANCE, Refit, SiteLearner
from ..fit.refit_worker import RefitWorker

PROPOSAL_NAME = "site_proposal.yaml"
# how often (steady seconds) the store's outcome count is read to see whether a refit is due
CHECK_EVERY_S = 2.0


def proposal_path(setting: str, store_file: str) -> str:
    """site_learning_proposal_path resolved.

    Empty means beside the store file (or under ROS_HOME/helpaware for a store kept in memory).
    """
    if setting:
        return setting
    if store_file:
        return os.path.join(os.path.dirname(os.path.abspath(store_file)), PROPOSAL_NAME)
    from ..store import default_store_path
    return os.path.join(os.path.dirname(str(default_store_path())), PROPOSAL_NAME)


class NodeLearning:
    def __init__(self, store, file_model: SiteModel, settings: LearningSettings,
                 ranges: dict, logger, proposal_file: str, node_name: str) -> None:
        self.store, self.logger = store, logger
        self.proposal_file, self.node_name = proposal_file, node_name
        resume = store.latest_learned() if hasattr(store, "latest_learned") else None
        self.learner = SiteLearner(file_model, settings, ranges, resume)
        self._worker: Optional[RefitWorker] = None   # a process, made at the first refit
        self._pool: Optional[concurrent.futures.ThreadPoolExecutor] = None   # if no process
        self._future: Optional[concurrent.futures.Future] = None
        self.refits = 0           # finished refit attempts
        self.failed = 0           # refits that raised, or whose revision the store refused
        self.last_error = ""
        self.last_proposal = ""
        self._checked_at = -float("inf")
        if resume is not None and settings.mode == "apply":
            logger.info(f"site learning: resumed revision {resume.revision} from the store "
                        f"({resume.n_outcomes} outcomes): "
                        + ", ".join(f"{k} {resume.constants[k]:.4g}" for k in LEARNED
                                    if k in resume.constants))

    @property
    def current(self) -> SiteModel:
        return self.learner.current

    @property
    def source(self) -> tuple[str, int]:
        return self.learner.source

    @property
    def running(self) -> bool:
        return self._future is not None or (self._worker is not None and self._worker.busy)

    def set_parameters(self, file_model: SiteModel, settings: LearningSettings) -> None:
        self.learner.set_file_model(file_model)
        self.learner.set_settings(settings)

    # ---------------------------------------------------------------- on the executor
    def poll(self, now_s: float) -> Optional[SiteModel]:
        """Pick up a finished refit or start one that is due; never blocks.

        Pick up a finished refit (the model to put in force, if it changed) or start one that is
        due. Never blocks.
        """
        if self.running:
            try:
                refit = self._collect()
            except Exception as exc:  # noqa: BLE001 - a bug, a store that cannot be read, a
                self.failed += 1       # worker that died: nothing changes
                self.last_error = f"{type(exc).__name__}: {exc}"[:200]
                self.logger.error(f"site learning: refit failed, nothing changed "
                                  f"({self.last_error})")
                if self._worker is not None and not self._worker.alive:
                    self._worker = None          # a new one at the next refit
                return None
            return None if refit is None else self._finished(refit)
        steady = time.monotonic()
        if now_s <= 0.0 or self.store is None or steady - self._checked_at < CHECK_EVERY_S:
            return None
        self._checked_at = steady
        try:
            total = self.store.event_count()
            if not self.learner.due(self.learner.new_outcomes(total), now_s):
                return None
            reader = self.store.learning_reader()
        except Exception as exc:  # noqa: BLE001 - the store's health is reported elsewhere
            self.last_error = f"{type(exc).__name__}: {exc}"[:200]
            return None
        self._start(reader, self.learner.job(now_s))
        return None

    def _start(self, reader, job) -> None:
        if self._pool is None and self._worker is None:
            try:
                self._worker = RefitWorker()
            except (OSError, RuntimeError, ValueError) as exc:
                self.logger.warning(f"site learning: no worker process ({exc}); refits run "
                                    "in a thread of this process (decisions share its time)")
        if self._worker is not None:
            try:
                self._worker.submit(reader, job)
                return
            except (OSError, ValueError, EOFError) as exc:
                self.logger.warning(f"site learning: worker process unusable ({exc}); "
                                    "refits run in a thread from now on")
                self._worker.stop()
                self._worker = None
        if self._pool is None:
            self._pool = concurrent.futures.ThreadPoolExecutor(
                max_workers=1, thread_name_prefix="site_learning")
        self._future = self._pool.submit(_run, reader, job)

    def _collect(self) -> Optional[Refit]:
        """Return the finished refit, or None while one runs (raises when it failed)."""
        if self._future is not None:
            if not self._future.done():
                return None
            future, self._future = self._future, None
            return future.result()
        assert self._worker is not None   # busy: a thread's future or a worker process
        reply = self._worker.poll()
        if reply is None:
            return None
        kind, value = reply
        if kind != "ok":
            raise RuntimeError(value)
        return value

    def _finished(self, refit: Refit) -> Optional[SiteModel]:
        self.refits += 1
        if refit.applied and self.learner.settings.mode != "apply":   # switched meanwhile
            refit = replace(refit, applied=False, model=refit.previous,
                            revision=refit.revision - 1)
        if refit.applied:
            entry = self.learner.entry(refit, getattr(self.store, "robot_id", ""),
                                       _utc_now())
            try:
                self.store.record_learned(entry)
            except Exception as exc:  # noqa: BLE001 - not kept, so not put in force
                self.failed += 1
                self.last_error = f"store refused revision {refit.revision}: {exc}"[:200]
                self.learner.record(replace(refit, accepted=False, applied=False,
                                            model=refit.previous, revision=refit.revision - 1,
                                            reason=self.last_error))
                self.logger.error(f"site learning: {self.last_error}; constants unchanged")
                return None
        self.learner.record(refit)            # on the executor: now it is in force
        self.logger.info(refit.summary())
        if refit.applied:
            return refit.model
        if self.learner.settings.mode == "propose" and refit.proposal is not None:
            self._write_proposal(refit)
        return None

    def _write_proposal(self, refit: Refit) -> None:
        from ..fit.paramfile import render_param_file
        values = {k: getattr(refit.proposal, k) for k in LEARNED}
        comments = [f"Proposed by site learning (site_learning: propose) at {_utc_now()} from "
                    f"{refit.n_outcomes} outcomes of {refit.n_people} people, shrunk towards "
                    f"the parameter values by site_prior_weight "
                    f"{self.learner.settings.prior_weight:g}.",
                    f"{refit.reason}."]
        for k in LEARNED:
            se = refit.std_errors.get(k)
            old = getattr(refit.previous, k)
            comments.append(f"{k}: in force {old:.4g}, proposed {values[k]:.4g}"
                            + (f" +/- {se:.3g} (1 s.e.)" if se is not None and se == se else ""))
        if refit.decline_aloud is not None:
            comments.append(f"{NUISANCE} (not a parameter): {refit.decline_aloud:.4g}")
        comments.append("Review, then load it with --params-file (or copy the values).")
        tmp = self.proposal_file + ".tmp"
        try:
            os.makedirs(os.path.dirname(os.path.abspath(self.proposal_file)), exist_ok=True)
            with open(tmp, "w", encoding="utf-8") as fh:
                fh.write(render_param_file(values, comments, self.node_name))
            os.replace(tmp, self.proposal_file)
            self.last_proposal = self.proposal_file
            self.logger.info(f"site learning: proposal written to {self.proposal_file}")
        except (OSError, ValueError) as exc:
            self.failed += 1
            self.last_error = f"proposal not written: {exc}"[:200]
            self.logger.error(f"site learning: {self.last_error}")

    def diagnostic_values(self) -> dict:
        s, last = self.learner.settings, self.learner.last
        model = self.current
        source, revision = self.source
        values = {"site_learning.mode": s.mode,
                  "site_learning.constants_source": source,
                  "site_learning.revision": revision,
                  "site_learning.running": self.running,
                  "site_learning.refits": self.refits,
                  "site_learning.failed": self.failed,
                  "site_learning.last_error": self.last_error,
                  "site_learning.last_refit": "" if last is None else last.reason[:200],
                  # old -> new of each constant the last accepted refit moved (applied or proposed)
                  "site_learning.last_change": "" if last is None else _changes_line(last),
                  "site_learning.last_refit_accepted": "" if last is None else last.accepted,
                  "site_learning.last_refit_time_s": "" if last is None else f"{last.time_s:.1f}",
                  "site_learning.last_refit_outcomes": "" if last is None else last.n_outcomes,
                  "site_learning.last_refit_duration_s": ("" if last is None
                                                          else f"{last.duration_s:.2f}"),
                  "site_learning.proposal_file": self.last_proposal}
        for k in LEARNED:
            values[f"site_model.{k}"] = f"{getattr(model, k):.6g}"
        return values

    def shutdown(self) -> None:
        """Stop the worker; a refit still running is dropped.

        Stop the worker: a refit still running is ended (process) or finishes in its thread and is
        dropped; nothing of it was in force yet.
        """
        if self._worker is not None:
            self._worker.stop()
            self._worker = None
        if self._pool is not None:
            self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = None
        self._future = None


def _run(reader, job) -> Refit:
    """Return a refit in a thread (when no worker process could be started)."""
    outcomes, asks = reader()
    return job.run(outcomes, asks)


def _changes_line(refit: Refit) -> str:
    return ", ".join(f"{n} {a:.4g} -> {b:.4g}" for n, a, b in refit.changes())[:400]


def _utc_now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
