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

"""Site learning: the site constants refitted from the store's events while a robot runs.

Contract (the node and the simulator both drive it; no ROS, no I/O, no clock read here):

    settings = LearningSettings(mode="apply", prior_weight=200.0, every_outcomes=50,
                                every_s=21600.0)
    learner = SiteLearner(file_model, settings, ranges=None)   # ranges: name -> (low, high)
    if learner.due(new_outcomes, now_s):                        # N new outcomes or T seconds
        refit = learner.refit(outcomes, asks, now_s)            # StoredEvent, AskEvent lists
        if refit.applied: use refit.model                       # the constants now in force

* `Refit.accepted` False: nothing changes (too few outcomes, the fit failed or did not
  converge by fit.convergence's verdict, mode off); `reason` says which in one line;
  `model` is then `previous`.  `revision` increases with each accepted change.
* What is refitted: prior_a, prior_b, k_busy, k_load, notice_probability and
  ask_memory_half_life_s (the SiteModel fields in LEARNED), plus the fit's nuisance
  decline_aloud (kept here, never in the node's model), by the marginal likelihood of
  fit/site_likelihood.py (the one `helpaware fit` maximises), from every outcome and ask given
  (own and peers'), the ask load recomputed from the ask times under each half-life.
* Shrinkage: the parameter file's values count as `prior_weight` pseudo-outcomes
  (fit/pseudo_outcomes.py: the expected log-likelihood of that many outcomes from the file's
  model), added to the same likelihood; the verdict is computed on that penalised objective.
  prior_weight 0 is the plain `helpaware fit` maximum of the same events.
* Never touched: costs and hard limits (DecisionConfig), evidence_half_life_s,
  default_busyness.  The fit's search box is narrowed to `ranges` (the node's parameter
  ranges), and every value is clipped into them.
* Deterministic: the events are sorted (person key, time, event id) and the fit always starts
  from the parameter file's values, so the same events give the same constants, whatever
  their arrival order or the refits before.
* `refit` may take seconds (run it off the executor); by default it records its own result
  (revision, time, outcomes seen) and returns it for the caller to apply; the node passes
  record=False and records it on its executor once the store has kept it, so the learner's
  state only ever changes there.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
import math
import threading
import time
from typing import Mapping, Optional, Sequence, TYPE_CHECKING

import numpy as np

from .data import ask_ages_from_times, FitInputError, from_arrays, OutcomeData, RESULT_CODE
from ..core.model import SiteModel
from ..core.person import Result
from ..store.base import AskEvent, LearnedEntry, StoredEvent

if TYPE_CHECKING:     # the fit (scipy) is imported by the first refit, not by the node's start
    from .convergence import ConvergenceVerdict
    from .site_fit import SiteFit
    from .site_likelihood import SiteParams

MODES = ("off", "propose", "apply")
MIN_OUTCOMES = 10                # fit.site_fit.MIN_OUTCOMES (tested equal)
LEARNED = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
           "ask_memory_half_life_s")
NUISANCE = "decline_aloud"
# SiteModel's own ranges (core/model.py) where no narrower ones are given
MODEL_RANGES: Mapping[str, tuple[float, float]] = {
    "prior_a": (1e-6, 1e6), "prior_b": (1e-6, 1e6), "k_busy": (0.0, 50.0),
    "k_load": (0.0, 50.0), "notice_probability": (0.0, 1.0),
    "ask_memory_half_life_s": (1e-3, 1e9)}


class LearningError(ValueError):
    """Settings the learner refuses (names the field and the allowed values)."""


@dataclass(frozen=True)
class LearningSettings:
    mode: str = "apply"              # "off" | "propose" | "apply"
    # site_prior_weight: the parameter file's values count as this many pseudo-outcomes.
    # 200 (our choice, no source): a robot asking 30 times a day has moved a constant about
    # halfway from the file to what its data say after a week (200 outcomes against 200), and
    # a first shift's 20 outcomes move it by about a tenth of the way (20 / 220)
    prior_weight: float = 200.0
    every_outcomes: int = 50         # refit after this many new outcomes ...
    every_s: float = 21600.0         # ... or this many seconds (with any new), whichever first
    max_iter: int = 300              # optimiser iteration limit of one refit

    def __post_init__(self) -> None:
        if self.mode not in MODES:
            raise LearningError(f"site_learning: {self.mode!r} is not one of {', '.join(MODES)}")
        for name, low, high in (("prior_weight", 0.0, 1e9), ("every_s", 1e-3, 1e12)):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not low <= v <= high:
                raise LearningError(f"{name}: {v!r} is outside the allowed range "
                                    f"[{low:g}, {high:g}]")
        for name in ("every_outcomes", "max_iter"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                raise LearningError(f"{name}: {v!r} must be a whole number >= 1")


@dataclass(frozen=True)
class Refit:
    # False: nothing changes (failed, not converged, too few outcomes, mode off)
    accepted: bool
    reason: str                      # one line, names what happened
    # the constants in force after this refit (unchanged when not accepted)
    model: SiteModel
    previous: SiteModel
    n_outcomes: int
    revision: int                    # increases with each accepted change
    verdict: Optional["ConvergenceVerdict"]
    proposal: Optional[SiteModel] = None     # the fitted constants (accepted), applied or not
    applied: bool = False            # the constants in force changed (mode apply)
    decline_aloud: Optional[float] = None
    std_errors: Mapping[str, float] = field(default_factory=dict)
    time_s: float = 0.0              # the caller's clock at the refit
    duration_s: float = 0.0          # wall time the refit took
    n_people: int = 0
    target: Mapping[str, float] = field(default_factory=dict)   # the file values shrunk towards

    def changes(self) -> list[tuple[str, float, float]]:
        """(name, old, new) of each learned constant the proposal changes."""
        if self.proposal is None:
            return []
        return [(n, getattr(self.previous, n), getattr(self.proposal, n)) for n in LEARNED
                if getattr(self.previous, n) != getattr(self.proposal, n)]

    def summary(self) -> str:
        """One line for the log: old -> new of each constant, number of outcomes."""
        if not self.accepted:
            return (f"site learning: refit on {self.n_outcomes} outcomes changed nothing: "
                    f"{self.reason}")
        moved = ", ".join(f"{n} {_g(a)} -> {_g(b)}" for n, a, b in self.changes()) or "no change"
        what = (f"revision {self.revision}" if self.applied else "proposal (not applied)")
        return (f"site learning: {what} from {self.n_outcomes} outcomes of {self.n_people} "
                f"people: {moved} ({self.reason})")


def _g(v: float) -> str:
    return f"{v:.4g}"


def overlay(file_model: SiteModel, constants: Mapping[str, float]) -> SiteModel:
    """Return the file's model with the learned constants in force (the other fields untouched)."""
    return replace(file_model, **{k: float(constants[k]) for k in LEARNED if k in constants})


def learned_values(model: SiteModel) -> dict[str, float]:
    return {k: float(getattr(model, k)) for k in LEARNED}


def learning_data(outcomes: Sequence[StoredEvent], asks: Sequence[AskEvent]) -> OutcomeData:
    """Return the events as a fit table, in one order whatever order they came in.

    People by key, each person's outcomes by (time, event id); each row's ask load is recomputed
    from the person's asks strictly before it (own and peers'), and the robot's recorded ask_load
    is the load column (used only where the half-life is not fitted).
    """
    rows = sorted((e for e in outcomes if e.result is not Result.COULD_NOT_ASK),
                  key=lambda e: (e.person_key, float(e.time_s), e.event_id))
    if not rows:
        raise FitInputError("no answered asks in the store yet")
    keys = sorted({e.person_key for e in rows})
    index = {k: i for i, k in enumerate(keys)}
    pidx = np.fromiter((index[e.person_key] for e in rows), dtype=np.int64, count=len(rows))
    times = np.fromiter((e.time_s for e in rows), dtype=float, count=len(rows))
    ask_rows = sorted(((index[a.person_key], float(a.time_s), a.event_id) for a in asks
                       if a.person_key in index))
    ap = np.fromiter((a[0] for a in ask_rows), dtype=np.int64, count=len(ask_rows))
    at = np.fromiter((a[1] for a in ask_rows), dtype=float, count=len(ask_rows))
    ages = ask_ages_from_times(pidx, times, ap, at)
    return from_arrays([e.person_key for e in rows], [e.busyness for e in rows],
                       [e.ask_load for e in rows], [RESULT_CODE[e.result] for e in rows],
                       keys, sources=("store",), prior_asks=ages)


def site_params(model: SiteModel, decline_aloud: float) -> "SiteParams":
    from .site_likelihood import SiteParams
    return SiteParams(model.prior_a, model.prior_b, model.k_busy, model.k_load,
                      model.notice_probability, decline_aloud, model.ask_memory_half_life_s)


def refit_constants(data: OutcomeData, target: SiteModel, prior_weight: float,
                    ranges: Mapping[str, tuple[float, float]], max_iter: int = 300
                    ) -> tuple["SiteFit", float]:
    """Fit the data shrunk towards `target` (pure; raises FitInputError).

    The penalised fit of the data shrunk towards `target` (pure; raises FitInputError). Returns the
    fit and the tau of the pseudo-outcomes.
    """
    from .pseudo_outcomes import curvature_floor, pseudo_outcomes, reporting_share
    from .site_fit import fit_site
    tau = reporting_share(data)
    start = site_params(target, tau)
    pseudo = floor = None
    if prior_weight > 0:
        pseudo = pseudo_outcomes(start, prior_weight)
        floor = curvature_floor(start, prior_weight, pseudo)
    fit = fit_site(data, start=start, pseudo=pseudo, ranges=dict(ranges), quadratic=floor,
                   notice_probability=target.notice_probability,
                   half_life_s=target.ask_memory_half_life_s, max_iter=max_iter)
    return fit, tau


@dataclass(frozen=True)
class RefitJob:
    """One refit as plain values: the learner's state when it was asked for.

    `run` is pure (no I/O, no shared state), so it may run in another thread or process.
    """

    settings: LearningSettings
    file_model: SiteModel
    previous: SiteModel               # the constants in force when asked
    revision: int
    ranges: Mapping[str, tuple[float, float]]
    now_s: float

    def run(self, outcomes: Sequence[StoredEvent], asks: Sequence[AskEvent]) -> Refit:
        started = time.perf_counter()
        settings, file_model, previous, revision = (self.settings, self.file_model,
                                                    self.previous, self.revision)
        now_s = self.now_s
        n = sum(1 for e in outcomes if e.result is not Result.COULD_NOT_ASK)

        def done(refit: Refit) -> Refit:
            return replace(refit, duration_s=time.perf_counter() - started,
                           target=learned_values(file_model))

        def refused(reason: str, verdict=None, n_people: int = 0) -> Refit:
            return done(Refit(False, reason, previous, previous, n, revision, verdict,
                              time_s=now_s, n_people=n_people))

        if settings.mode == "off":
            return refused("site_learning is off")
        if n < MIN_OUTCOMES:
            return refused(f"too few outcomes: {n}, a refit needs at least {MIN_OUTCOMES}")
        try:
            data = learning_data(outcomes, asks)
            fit, _tau = refit_constants(data, file_model, settings.prior_weight, self.ranges,
                                        settings.max_iter)
        except FitInputError as exc:
            return refused(f"cannot refit: {exc}")
        except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
            return refused(f"refit failed: {type(exc).__name__}: {str(exc)[:120]}")
        if not fit.converged:
            return refused(f"not converged: {fit.reason}", fit.verdict, data.n_people)
        assert fit.verdict is not None   # converged: a verdict said so
        values = {}
        for k in LEARNED:
            v = getattr(fit.params, k)
            if v is None or not math.isfinite(v):
                v = getattr(file_model, k)   # not fitted (no ask times): the file's value
            low, high = self.ranges[k]
            values[k] = float(min(max(v, low), high))
        proposal = overlay(file_model, values)
        se = {k: v for k, v in fit.std_errors.items() if k in LEARNED or k == NUISANCE}
        apply = settings.mode == "apply" and learned_values(proposal) != learned_values(previous)
        reason = fit.verdict.line()
        if settings.mode == "apply" and not apply:
            reason = "no change: " + reason
        return done(Refit(True, reason, proposal if apply else previous, previous, n,
                          revision + 1 if apply else revision, fit.verdict, proposal, apply,
                          float(fit.params.decline_aloud), se, now_s, n_people=data.n_people))


class SiteLearner:
    """When to refit, and the refit itself; keeps the revision and the constants in force."""

    def __init__(self, file_model: SiteModel, settings: LearningSettings,
                 ranges: Optional[Mapping[str, tuple[float, float]]] = None,
                 resume: Optional[LearnedEntry] = None) -> None:
        self.settings = settings
        self.ranges = {k: (float(v[0]), float(v[1])) for k, v in (ranges or MODEL_RANGES).items()
                       if k in LEARNED}
        for k, v in MODEL_RANGES.items():
            self.ranges.setdefault(k, v)
        self._lock = threading.Lock()
        self.file_model = file_model
        self.learned: dict[str, float] = {}      # the latest applied revision's constants
        self.decline_aloud: Optional[float] = None
        self.revision = 0
        self.outcomes_seen = 0                   # outcomes the last refit attempt saw
        self.last_attempt_s: Optional[float] = None
        self.last: Optional[Refit] = None
        self._target_changed = False
        self._started_s: Optional[float] = None
        if resume is not None:
            self.learned = {k: float(resume.constants[k]) for k in LEARNED
                            if k in resume.constants}
            self.decline_aloud = resume.constants.get(NUISANCE)
            self.revision = int(resume.revision)
            self.outcomes_seen = int(resume.n_outcomes)
            self.last_attempt_s = float(resume.time_s)
            target = {k: resume.target.get(k) for k in LEARNED}
            self._target_changed = target != learned_values(file_model)

    # -- what is in force
    @property
    def current(self) -> SiteModel:
        """Return the constants in force.

        The file's, with the learned ones over them (mode apply).
        """
        if self.settings.mode != "apply" or not self.learned:
            return self.file_model
        return overlay(self.file_model, self.learned)

    @property
    def source(self) -> tuple[str, int]:
        """Where the constants in force came from: ("parameter_file", 0) or ("learned", N)."""
        if self.settings.mode == "apply" and self.learned:
            return "learned", self.revision
        return "parameter_file", 0

    def set_file_model(self, model: SiteModel) -> None:
        """Take the changed parameter values (a live `ros2 param set`).

        They are the new shrinkage target; when a learned constant's value changed, refit at the
        next chance.
        """
        with self._lock:
            if learned_values(model) != learned_values(self.file_model):
                self._target_changed = True
            self.file_model = model

    def set_settings(self, settings: LearningSettings) -> None:
        with self._lock:
            self.settings = settings

    # -- when
    def due(self, new_outcomes: int, now_s: float) -> bool:
        """N new outcomes since the last refit, or T seconds with at least one new outcome.

        Or a changed target; never in mode off or with fewer outcomes than a fit needs.
        """
        s = self.settings
        if s.mode == "off":
            return False
        if self._started_s is None:
            self._started_s = now_s
        since = self.last_attempt_s if self.last_attempt_s is not None else self._started_s
        total = self.outcomes_seen + max(new_outcomes, 0)
        if total < MIN_OUTCOMES:
            return False
        return (new_outcomes >= s.every_outcomes or self._target_changed
                or (new_outcomes > 0 and now_s - since >= s.every_s))

    def new_outcomes(self, total_outcomes: int) -> int:
        """Outcomes stored since the last refit attempt (the store's count minus those seen)."""
        return max(int(total_outcomes) - self.outcomes_seen, 0)

    # -- the refit
    def job(self, now_s: float) -> "RefitJob":
        """Return what a refit needs of this learner, as plain values (for another process)."""
        with self._lock:
            return RefitJob(self.settings, self.file_model, self.current, self.revision,
                            dict(self.ranges), now_s)

    def refit(self, outcomes: Sequence[StoredEvent], asks: Sequence[AskEvent],
              now_s: float, record: bool = True) -> Refit:
        """Return the result of refitting (no I/O).

        `record` True: its result is recorded here at once (revision, constants in force, time,
        outcomes seen); False: the caller records it with `record(refit)` later, e.g. on its
        executor after keeping it in a store.
        """
        refit = self.job(now_s).run(outcomes, asks)
        if record:
            self.record(refit)
        return refit

    def record(self, refit: Refit) -> None:
        """Take a refit's result.

        The attempt (time, outcomes seen) and, if applied, its constants and revision as the ones
        in force.
        """
        with self._lock:
            self.last = refit
            self.outcomes_seen = max(self.outcomes_seen, refit.n_outcomes)
            self.last_attempt_s = refit.time_s
            if refit.accepted and refit.target == learned_values(self.file_model):
                self._target_changed = False      # (a change during the refit still counts)
                if refit.decline_aloud is not None:
                    self.decline_aloud = refit.decline_aloud
            if refit.applied:
                self.learned = learned_values(refit.model)
                self.revision = refit.revision

    def entry(self, refit: Refit, robot_id: str = "", recorded_utc: str = "") -> LearnedEntry:
        """Return the history row of an applied refit, for the store."""
        constants = learned_values(refit.model)
        if refit.decline_aloud is not None:
            constants[NUISANCE] = refit.decline_aloud
        target = learned_values(self.file_model)
        target["prior_weight"] = float(self.settings.prior_weight)
        return LearnedEntry(refit.revision, refit.time_s, constants, target, refit.n_outcomes,
                            refit.verdict.to_dict() if refit.verdict else {}, recorded_utc,
                            robot_id)
