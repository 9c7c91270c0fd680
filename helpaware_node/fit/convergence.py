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

"""Did a fit reach its maximum?  A verdict from the solution itself, not the optimiser's status.

L-BFGS-B's status describes its own bookkeeping, not the likelihood: at a maximum where the
log-likelihood no longer changes above rounding, its line search can give up ("ABNORMAL")
although the solution is exact, and a status of success says nothing about a likelihood
that keeps rising towards the edge of the search range.  So the verdict looks at the
solution, in the optimiser's coordinates z (log, logit or natural scale, as the fit uses):

* scaled gradient  sqrt(g' (-H)^-1 g), g and H the gradient and Hessian of the
  log-likelihood on the coordinates that are not held at a limit (the Newton decrement;
  Boyd and Vandenberghe, Convex Optimization, 2004, section 9.5.1).  It is the distance from
  the solution to the maximum of the local quadratic model measured in standard errors, half
  its square is the log-likelihood still to gain, and it does not depend on the units or the
  transformation of the coordinates;
* Newton step  max |((-H)^-1 g)_i|: how far one more Newton step would still move an
  estimate in the optimiser's coordinates.  With a small scaled gradient a large step means an
  almost flat direction along which the likelihood keeps creeping up towards a supremum it
  never reaches (every answer the same, no spread across people);
* last change: the log-likelihood gained over the optimiser's last iteration.

A coordinate that sits at a limit with the likelihood rising outwards is held there: at a
natural limit of the model (k = 0, a probability of 0 or 1, a random-effect sd of 0) that is
an answer; at the edge of the search range (a prior strength of 1e6) it means the maximum
lies outside the range, and the fit failed.  Thresholds and why: docs/fit.md.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass
import math
from typing import Callable, Sequence

import numpy as np
from scipy.special import expit

# the estimate is within 1e-3 standard errors of the maximum, 5e-7 log-likelihood units below it
SCALED_GRADIENT_TOL = 1e-3
# one more Newton step would move no estimate by more than 1e-3 (0.1 % for a log-scale constant)
NEWTON_STEP_TOL = 1e-3
# the last iteration gained less than this much log-likelihood (2 x 1e-4 in an LR statistic)
LAST_CHANGE_TOL = 1e-4

# only names the cause of a failure, never decides one: a step longer than this many
# standard errors' worth of lambda means a nearly flat direction (a drift), not a stop short
DRIFT_RATIO = 10.0

CAUSES = ("not_finite", "edge", "flat", "iteration_limit", "stalled", "drift", "still_rising")


@dataclass(frozen=True)
class Coordinate:
    """One optimiser coordinate and its limits.

    `low`/`high`: at or beyond this value the coordinate counts as at that limit (for a box bound,
    the bound; for a probability on the logit scale, where the optimiser never reaches the infinite
    bound, a value where the probability is within 1e-6 of 0 or 1).  `*_natural`: the limit is a
    value the model allows (a maximum there is an answer) rather than the edge of the search range.
    """

    name: str
    low: float = -math.inf
    high: float = math.inf
    low_natural: bool = False
    high_natural: bool = False
    scale: str = "identity"        # how z maps to the reported value: identity, log, logit
    low_hint: str = ""             # what the data look like, what to try, when the fit runs
    high_hint: str = ""            # to that edge of the search range

    def natural_value(self, z: float) -> float:
        if self.scale == "log":
            return math.exp(z)
        if self.scale == "logit":
            return float(expit(z))
        return z


@dataclass(frozen=True)
class ConvergenceVerdict:
    converged: bool
    reason: str                        # one line: the figures, or what failed and what to try
    cause: str                         # "" when converged, else one of CAUSES
    scaled_gradient: float             # Newton decrement, in standard errors (nan: not computed)
    newton_step: float                 # largest move of one more Newton step (optimiser scale)
    last_change: float | None          # log-likelihood gained in the last iteration
    iterations: int
    names: tuple[str, ...]             # the coordinates below, in order
    gradient: tuple[float, ...]        # d log-likelihood / d z at the solution
    held_at_limit: tuple[str, ...] = ()    # coordinates held at a natural limit
    optimiser_status: str = ""         # the optimiser's own message, kept for the record only

    def line(self) -> str:
        """Return the verdict as a tool prints it: 'converged: ...' or 'NOT converged: ...'."""
        return f"{'converged' if self.converged else 'NOT converged'}: {self.reason}"

    def to_dict(self) -> dict:
        """Plain values (for logs and the store); None for figures that were not computed."""
        d = asdict(self)
        for k in ("scaled_gradient", "newton_step"):
            if not math.isfinite(d[k]):
                d[k] = None
        d["names"], d["gradient"] = list(self.names), list(self.gradient)
        d["held_at_limit"] = list(self.held_at_limit)
        return d


def _g(x: float) -> str:
    return f"{x:.2g}"


def assess_convergence(coords: Sequence[Coordinate], z: np.ndarray, loglik: float,
                       gradient: np.ndarray, hessian: np.ndarray,
                       loglik_history: Sequence[float], max_iter: int,
                       optimiser_status: str = "") -> ConvergenceVerdict:
    """Return the verdict at the solution z of a maximisation.

    gradient, hessian: of the log-likelihood (or any objective being maximised) in z, over
    `coords` (the Hessian's rows of coordinates held at a limit are not used);
    loglik_history: the objective at the start and after each iteration.  Pure: no I/O.
    """
    z = np.asarray(z, float)
    g = np.asarray(gradient, float)
    hess = np.asarray(hessian, float)
    names = tuple(c.name for c in coords)
    iterations = max(len(loglik_history) - 1, 0)
    last = (float(loglik_history[-1] - loglik_history[-2]) if len(loglik_history) >= 2
            else None)

    def verdict(ok, reason, cause="", lam=math.nan, step=math.nan, held=()):
        return ConvergenceVerdict(ok, reason, cause, lam, step, last, iterations, names,
                                  tuple(float(v) for v in g), tuple(held), optimiser_status)

    if not (math.isfinite(loglik) and np.all(np.isfinite(g)) and np.all(np.isfinite(z))):
        return verdict(False, "the log-likelihood or its gradient is not finite at the solution "
                       f"(log-likelihood {loglik!r}): check the data for impossible rows",
                       "not_finite")
    held: list[int] = []
    free: list[int] = []
    for i, c in enumerate(coords):
        at_low, at_high = z[i] <= c.low, z[i] >= c.high
        outward = (at_low and g[i] <= 0.0) or (at_high and g[i] >= 0.0)
        if outward and not (c.low_natural if at_low else c.high_natural):
            edge = c.natural_value(c.low if at_low else c.high)
            hint = c.low_hint if at_low else c.high_hint
            return verdict(False, f"{c.name} ran to the {'lower' if at_low else 'upper'} edge "
                           f"of its search range ({_g(edge)}), the likelihood still rising: no "
                           f"maximum in range{'; ' + hint if hint else ''}", "edge")
        (held if outward else free).append(i)
    held_names = tuple(names[i] for i in held)
    if not free:
        return verdict(True, "every fitted constant at a limit of the model, the likelihood "
                       "rising towards each" + _tail(last), lam=0.0, step=0.0,
                       held=held_names)
    gf = g[free]
    neg_h = -hess[np.ix_(free, free)]
    neg_h = 0.5 * (neg_h + neg_h.T)
    if not np.all(np.isfinite(neg_h)):
        return verdict(False, "the likelihood's curvature is not finite at the solution: "
                       "check the data for impossible rows", "not_finite", held=held_names)
    try:
        chol = np.linalg.cholesky(neg_h)
    except np.linalg.LinAlgError:
        if iterations >= max_iter:
            return verdict(False, f"the likelihood is not curved downwards at the iteration "
                           f"limit ({max_iter} iterations): not near a maximum yet; allow more "
                           "iterations", "iteration_limit", held=held_names)
        vals, vecs = np.linalg.eigh(neg_h)
        flat = vals <= 1e-12 * max(float(np.max(np.abs(vals))), 1e-300)
        worst = [names[free[j]] for j in range(len(free))
                 if np.any(np.abs(vecs[j, flat]) > 0.3)]
        them = "it" if len(worst) == 1 else "them"
        return verdict(False, f"the likelihood is flat or not curved downwards in "
                       f"{', '.join(worst)} at the solution (every answer alike, or too few): "
                       f"the data do not determine {them}; fix {them} or collect more varied "
                       "outcomes", "flat", held=held_names)
    step = np.linalg.solve(chol.T, np.linalg.solve(chol, gf))
    lam = math.sqrt(max(float(gf @ step), 0.0))
    big = int(np.argmax(np.abs(step)))
    max_step = float(abs(step[big]))
    figures = f"scaled gradient {_g(lam)}"
    if lam > SCALED_GRADIENT_TOL or max_step > NEWTON_STEP_TOL:
        if max_step > NEWTON_STEP_TOL and max_step > DRIFT_RATIO * lam:
            name = names[free[big]]
            direction = "up" if step[big] > 0 else "down"
            return verdict(False, f"{name} is still drifting {direction} (one more Newton "
                           f"step would move it by {_g(max_step)}, {figures}) over an almost "
                           "flat likelihood: no maximum in that direction (answers too "
                           "uniform, or too few per person); fix it or collect more varied "
                           "outcomes", "drift", lam, max_step, held_names)
        if iterations >= max_iter:
            return verdict(False, f"{figures} at the iteration limit ({max_iter} "
                           "iterations): the optimum is not reached yet; allow more iterations",
                           "iteration_limit", lam, max_step, held_names)
        status = f" ({optimiser_status.strip()})" if optimiser_status.strip() else ""
        return verdict(False, f"{figures}: the optimiser gave up short of the optimum after "
                       f"{iterations} iterations{status}; fixing a weakly determined constant "
                       "may help, otherwise report the data", "stalled", lam, max_step,
                       held_names)
    if last is not None and last > LAST_CHANGE_TOL:
        return verdict(False, f"{figures}, but the last iteration still gained {_g(last)} in "
                       "log-likelihood: the gradient and the progress disagree; allow more "
                       "iterations", "still_rising", lam, max_step, held_names)
    at = f"; at a limit: {', '.join(held_names)}" if held_names else ""
    return verdict(True, f"{figures}{_tail(last)}{at}", "", lam, max_step,
                   held_names)


def _tail(last: float | None) -> str:
    if last is None:
        return ", no iterations (the start was the optimum)"
    return f", last change {_g(abs(last)) if abs(last) > 0 else '0'}"


class IterationLog:
    """A minimisation objective that keeps the log-likelihood of each iteration.

    Wraps a minimisation objective fun(z) -> (value, gradient) so that the log-likelihood (-value)
    at the start and after each accepted iteration is kept, without extra evaluations when the
    optimiser's last evaluation was the accepted point.
    """

    def __init__(self, fun: Callable[[np.ndarray], tuple[float, np.ndarray]],
                 on_iteration: Callable[[float], None] | None = None):
        self.fun, self.on_iteration = fun, on_iteration
        self.history: list[float] = []
        self._last_z: np.ndarray | None = None
        self._last_value = math.nan

    def __call__(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        value, grad = self.fun(z)
        self._last_z, self._last_value = np.array(z, float, copy=True), float(value)
        if not self.history:
            self.history.append(-float(value))
        return value, grad

    def callback(self, zk: np.ndarray) -> None:
        if self._last_z is not None and np.array_equal(zk, self._last_z):
            value = self._last_value
        else:
            value = float(self.fun(np.asarray(zk, float))[0])
        self.history.append(-value)
        if self.on_iteration is not None:
            self.on_iteration(-value)


def hessian_by_differences(grad: Callable[[np.ndarray], np.ndarray], z: np.ndarray,
                           idx: Sequence[int] | np.ndarray, h: float = 1e-4,
                           lower: np.ndarray | None = None,
                           upper: np.ndarray | None = None, central: bool = True,
                           grad_at_z: np.ndarray | None = None) -> np.ndarray:
    """Return the Hessian from differences of the gradient.

    Hessian (full size; rows and columns outside `idx` left at 0) from differences of the gradient:
    central (error O(h^2), for standard errors) where z +/- h stays inside [lower, upper] (where
    the function is defined), else one-sided into the interior, which costs half as many gradients
    (error O(h), ample for a verdict) when central is False.
    """
    k = z.size
    lo = np.full(k, -np.inf) if lower is None else np.asarray(lower, float)
    hi = np.full(k, np.inf) if upper is None else np.asarray(upper, float)
    hess = np.zeros((k, k))
    idx = list(idx)
    g0 = None if grad_at_z is None else np.asarray(grad_at_z, float)

    def at_z():
        nonlocal g0
        if g0 is None:
            g0 = np.asarray(grad(z), float)
        return g0

    for i in idx:
        up, down = z.copy(), z.copy()
        up[i] += h
        down[i] -= h
        if up[i] <= hi[i] and (not central or down[i] < lo[i]):
            col = (np.asarray(grad(up)) - at_z()) / h
        elif down[i] >= lo[i] and (not central or up[i] > hi[i]):
            col = (at_z() - np.asarray(grad(down))) / h
        else:
            col = (np.asarray(grad(up)) - np.asarray(grad(down))) / (2 * h)
        hess[idx, i] = col[idx]
    sub = hess[np.ix_(idx, idx)]
    hess[np.ix_(idx, idx)] = 0.5 * (sub + sub.T)
    return hess
