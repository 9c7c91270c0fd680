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

"""Maximum marginal likelihood of the site constants, standard errors and the test of context.

Optimised by L-BFGS-B on theta = (log a0, log b0, k_busy, k_load, logit q, logit tau, log h).
The k's stay on their natural scale with the bound k >= 0 because k = 0 is a legitimate value
(it is the null of the likelihood-ratio test) that a log or softplus map could only approach.
The ask-memory half-life h is fitted when the data carry ask times (the load is recomputed
under each h inside the likelihood) and k_load is free; with k_load at 0 it has no effect and
is reported as not identified.  An online refit adds pseudo-outcomes from the parameter file
(`pseudo`, fit/pseudo_outcomes.py) as a second term of the same likelihood: the objective,
its gradient, the verdict and the standard errors are all of that penalised sum.
Gradient: analytic in every coordinate; in a0 and b0 through the Gauss-Jacobi nodes and
weights, which move with them (site_likelihood.beta_rule_derivatives: the rule is exact for
the likelihood at every a0, b0, so its derivative is the likelihood's).  Standard errors
come from the Hessian (central differences of that gradient) on the transformed scale,
carried back by the delta method.  Whether the fit reached its maximum is judged from the
solution itself (fit/convergence.py), never from the optimiser's status.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
import math
from typing import Any, Callable, Sequence

import numpy as np
from scipy import optimize, stats
from scipy.special import expit, logit

from .convergence import (
    assess_convergence,
    ConvergenceVerdict,
    Coordinate,
    hessian_by_differences,
    IterationLog,
)
from .data import FitInputError, HELPED, OutcomeData
from .progress import Progress
from .site_likelihood import SiteLikelihood, SiteParams

NAMES = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability", "decline_aloud",
         "ask_memory_half_life_s")
H = NAMES.index("ask_memory_half_life_s")
K_MAX = 50.0                      # SiteModel's range for k_busy, k_load
LOG_AB_BOUNDS = (math.log(1e-3), math.log(1e6))
LOGIT_BOUNDS = (-30.0, 30.0)
# the ask memory searched: a second to a week (a day is the longest issue 20 has seen; the
# data then span weeks); DEFAULT_HALF_LIFE_S where the data carry no ask times
HALF_LIFE_BOUNDS_S = (1.0, 7 * 86400.0)
DEFAULT_HALF_LIFE_S = 1800.0
MIN_OUTCOMES = 10
MIN_SPREAD = 1e-9                 # a covariate with less spread than this is "constant"
BOUND_SLACK = 1e-8                # this close to a box bound counts as at it
LOGIT_AT_LIMIT = 14.0             # |logit| beyond this: a probability within 1e-6 of 0 or 1
BOUNDS = (LOG_AB_BOUNDS, LOG_AB_BOUNDS, (0.0, K_MAX), (0.0, K_MAX), LOGIT_BOUNDS, LOGIT_BOUNDS,
          (math.log(HALF_LIFE_BOUNDS_S[0]), math.log(HALF_LIFE_BOUNDS_S[1])))
PRIOR_HINTS = {"low_hint": "people look as if each always or never helps: collect more asks "
                           "per person, or set prior_a and prior_b by hand",
               "high_hint": "willingness shows no spread across people that the data can "
                            "measure: collect more asks per person, or set prior_a and prior_b "
                            "by hand"}
K_HINT = "help practically stops as this covariate rises: check its scale in the data, or fix it"
H_HINTS: dict[str, Any] = {
    "low_hint": "asks seem to weigh on people for no time at all: fix ask_memory_half_life_s, "
                "or fix k_load at 0",
    "high_hint": "asks seem to weigh on people for longer than the search range: fix "
                 "ask_memory_half_life_s at the longest memory you believe"}


def theta_bounds(ranges: dict | None = None) -> list[tuple[float, float]]:
    """Return the search box in theta.

    BOUNDS narrowed by `ranges` (natural scale, name -> (low, high), e.g. the node's parameter
    ranges), never widened.
    """
    out = list(BOUNDS)
    to_z: dict[int, Callable[[float], float]] = {
        0: math.log, 1: math.log, 2: float, 3: float, 4: _logit_safe, 5: _logit_safe, 6: math.log}
    for name, (low, high) in (ranges or {}).items():
        if name not in NAMES:
            continue
        i = NAMES.index(name)
        lo, hi = out[i]
        zl = to_z[i](low) if low > 0 or i in (2, 3) else -math.inf
        zh = to_z[i](high) if (i not in (4, 5) or high < 1) else math.inf
        out[i] = (max(lo, zl), min(hi, zh))
        if out[i][0] > out[i][1]:
            raise FitInputError(f"{name}: range [{low:g}, {high:g}] leaves nothing to search")
    return out


def _logit_safe(v: float) -> float:
    return float(logit(min(max(v, 1e-300), 1.0 - 1e-16)))


def coordinates(bounds: Sequence[tuple[float, float]] = BOUNDS) -> tuple[Coordinate, ...]:
    """Return the optimiser's coordinates with their limits.

    a0, b0 have only search-range edges (a Beta prior of strength 0 or infinity is no answer); k =
    0 and probabilities of 0 or 1 are values the model allows; the half-life's edges are the search
    range's.  A range narrowed below a natural limit (a node's k_busy range starting at 0.5) makes
    that limit an edge.
    """
    (la, ha), (lb, hb), (lk1, hk1), (lk2, hk2), (lq, hq), (lt, ht), (lh, hh) = bounds
    prior = lambda lo, hi: dict(low=lo + BOUND_SLACK, high=hi - BOUND_SLACK,   # noqa: E731
                                scale="log", **PRIOR_HINTS)
    k = lambda lo, hi: {"low": lo + BOUND_SLACK, "high": hi - BOUND_SLACK,   # noqa: E731
                        "low_natural": lo <= 0.0, "high_hint": K_HINT}

    def prob(lo, hi):
        return {"low": max(-LOGIT_AT_LIMIT, lo + BOUND_SLACK),
                "high": min(LOGIT_AT_LIMIT, hi - BOUND_SLACK),
                "low_natural": lo <= LOGIT_BOUNDS[0], "high_natural": hi >= LOGIT_BOUNDS[1],
                "scale": "logit"}
    return (Coordinate("prior_a", **prior(la, ha)), Coordinate("prior_b", **prior(lb, hb)),
            Coordinate("k_busy", **k(lk1, hk1)), Coordinate("k_load", **k(lk2, hk2)),
            Coordinate("notice_probability", **prob(lq, hq)),
            Coordinate("decline_aloud", **prob(lt, ht)),
            Coordinate("ask_memory_half_life_s", low=lh + BOUND_SLACK, high=hh - BOUND_SLACK,
                       scale="log", **H_HINTS))


def to_theta(p: SiteParams) -> np.ndarray:
    q = min(max(p.notice_probability, 1e-12), 1 - 1e-12)
    t = min(max(p.decline_aloud, 1e-12), 1 - 1e-12)
    h = p.ask_memory_half_life_s or DEFAULT_HALF_LIFE_S
    return np.array([math.log(p.prior_a), math.log(p.prior_b), p.k_busy, p.k_load,
                     float(logit(q)), float(logit(t)), math.log(h)])


def from_theta(theta: np.ndarray, half_life: bool = True) -> SiteParams:
    """Return the natural values; `half_life` False: no half-life (the data's load column)."""
    return SiteParams(math.exp(theta[0]), math.exp(theta[1]), float(theta[2]), float(theta[3]),
                      float(expit(theta[4])), float(expit(theta[5])),
                      math.exp(theta[H]) if half_life else None)


def natural_jacobian(theta: np.ndarray) -> np.ndarray:
    """Return d natural / d theta (diagonal) for the delta method."""
    q, t = expit(theta[4]), expit(theta[5])
    return np.array([math.exp(theta[0]), math.exp(theta[1]), 1.0, 1.0, q * (1 - q), t * (1 - t),
                     math.exp(theta[H])])


class Objective:
    """Negative log-likelihood and its gradient in theta, on the free coordinates only.

    `liks`: the terms summed (the data, and for an online refit the pseudo-outcomes); each is the
    same SiteLikelihood, so the penalised objective is one likelihood code path.
    """

    def __init__(self, lik: SiteLikelihood | Sequence[SiteLikelihood], free: np.ndarray,
                 fixed_theta: np.ndarray, half_life: bool = True,
                 quadratic: tuple[np.ndarray, np.ndarray] | None = None):
        self.liks = [lik] if isinstance(lik, SiteLikelihood) else list(lik)
        self.lik = self.liks[0]
        self.free, self.base = free, fixed_theta.copy()
        self.half_life = half_life
        # -(1/2) (theta - centre)' P (theta - centre): the shrinkage's curvature floor
        self.quadratic = quadratic

    def _quadratic(self, th: np.ndarray) -> tuple[float, np.ndarray]:
        if self.quadratic is None:
            return 0.0, np.zeros(len(NAMES))
        centre, prec = self.quadratic
        d = th - centre
        g = -(prec @ d)
        return 0.5 * float(d @ g), g

    def full(self, z: np.ndarray) -> np.ndarray:
        th = self.base.copy()
        th[self.free] = z
        return th

    def params(self, th: np.ndarray) -> SiteParams:
        return from_theta(th, self.half_life)

    def loglik_theta(self, th: np.ndarray) -> float:
        p = self.params(th)
        return sum(lik.loglik(p) for lik in self.liks) + self._quadratic(th)[0]

    def loglik_and_grad(self, th: np.ndarray) -> tuple[float, np.ndarray]:
        p = self.params(th)
        ll, nat = 0.0, np.zeros(len(NAMES))   # d/d (a0, b0, k_busy, k_load, q, tau, log h)
        for lik in self.liks:
            v, g_nat = lik.value_and_grad(p)
            ll += v
            nat += g_nat
        g = nat * natural_jacobian(th)        # log h is already the coordinate
        g[H] = nat[H] if self.half_life else 0.0
        q_val, q_grad = self._quadratic(th)
        return ll + q_val, g + q_grad

    def __call__(self, z: np.ndarray) -> tuple[float, np.ndarray]:
        ll, g = self.loglik_and_grad(self.full(z))
        if not math.isfinite(ll):
            return 1e300, np.zeros(int(np.sum(self.free)))
        return -ll, -g[self.free]


@dataclass
class SiteFit:
    params: SiteParams
    loglik: float
    free: tuple[str, ...]
    fixed: dict[str, str]                      # name -> reason it was fixed
    std_errors: dict[str, float] = field(default_factory=dict)   # natural scale
    at_bound: tuple[str, ...] = ()
    iterations: int = 0
    messages: list[str] = field(default_factory=list)
    n_people: int = 0
    n_outcomes: int = 0
    verdict: ConvergenceVerdict | None = None    # from the solution (fit/convergence.py)

    @property
    def converged(self) -> bool:
        return self.verdict is not None and self.verdict.converged

    @property
    def reason(self) -> str:
        """Why the fit stopped: the verdict's words, or "no convergence verdict" without one."""
        return self.verdict.reason if self.verdict is not None else "no convergence verdict"


def moments_start(data: OutcomeData) -> tuple[float, float]:
    """Start by the method of moments on per-person help rates (mean and sd, ddof = 1, of y/n)."""
    n = np.bincount(data.person, minlength=data.n_people).astype(float)
    y = np.bincount(data.person, (data.result == HELPED).astype(float), minlength=data.n_people)
    rate = (y / np.maximum(n, 1))[n > 0]
    m = float(np.mean(rate))
    v = float(np.var(rate, ddof=1)) if rate.size > 1 else 0.0
    m = min(max(m, 0.02), 0.98)
    if v <= 0.0 or v >= m * (1 - m):
        s = 4.0
    else:
        s = m * (1 - m) / v - 1.0
    s = min(max(s, 0.05), 1e5)
    return m * s, (1 - m) * s


def check_data(data: OutcomeData, fix_k_busy: bool = False, fix_k_load: bool = False,
               notice_probability: float = 0.8, load: np.ndarray | None = None,
               penalised: bool = False
               ) -> tuple[dict[str, float], dict[str, str], list[str]]:
    """Decide which constants the data can identify. Returns (fixed values, reasons, notes).

    Raises FitInputError when nothing sensible can be fitted.  `load`: the ask load per row
    (recomputed from ask times) when not the data's column.  `penalised`: pseudo-outcomes from the
    parameter file join the data (an online refit), so only too little data is refused and nothing
    is fixed for want of variation: the pseudo-outcomes pin it.
    """
    counts = data.counts()
    n = data.n_outcomes
    if n < MIN_OUTCOMES:
        raise FitInputError(f"too little data: {n} answered asks; need at least {MIN_OUTCOMES}")
    values, reasons, notes = {}, {}, []
    if fix_k_busy:
        values["k_busy"], reasons["k_busy"] = 0.0, "fixed at 0 on request"
    if fix_k_load:
        values["k_load"], reasons["k_load"] = 0.0, "fixed at 0 on request"
    if penalised:
        return values, reasons, list(reasons.values())
    helped, not_helped = counts["helped"], counts["declined"] + counts["no_response"]
    if helped == 0:
        raise FitInputError(f"no helped asks among {n}: the prior cannot be estimated "
                            "(willingness would go to 0)")
    if not_helped == 0:
        raise FitInputError(f"no declines or no-responses among {n} answered asks: the prior "
                            "cannot be estimated (willingness would go to 1)")
    if data.n_people == 1:
        notes.append("a single person: prior_a and prior_b describe only that person's "
                     "history; their spread across people is not identified")
    load = data.load if load is None else load
    for name, column in (("k_busy", data.busyness), ("k_load", load)):
        if name not in values and np.ptp(column) <= MIN_SPREAD:
            values[name] = 0.0
            label = "busyness" if name == "k_busy" else "ask load"
            reasons[name] = (f"{label} does not vary in the data (always {column[0]:g}); "
                             f"{name} cannot be told apart from the prior mean: fixed at 0")
    if counts["no_response"] == 0:
        values["notice_probability"] = notice_probability
        values["decline_aloud"] = 1.0
        reasons["notice_probability"] = (f"no no-response rows: notice_probability cannot be "
                                         f"estimated; kept at {notice_probability:g}")
    elif counts["declined"] == 0:
        notes.append("no explicit declines: the decline-aloud rate sits at its bound 0 and "
                     "notice_probability is weakly determined")
    for r in reasons.values():
        notes.append(r)
    return values, reasons, notes


def fit_site(data: OutcomeData, start: SiteParams | None = None, fixed: dict | None = None,
             fix_k_busy: bool = False, fix_k_load: bool = False,
             notice_probability: float = 0.8, progress: Progress | None = None,
             standard_errors: bool = True, max_iter: int = 500,
             half_life_s: float = DEFAULT_HALF_LIFE_S, fit_half_life: bool | None = None,
             pseudo: OutcomeData | None = None, ranges: dict | None = None,
             quadratic: tuple[np.ndarray, np.ndarray] | None = None) -> SiteFit:
    """Maximum (penalised) marginal likelihood of the site constants.

    half_life_s: the ask-memory half-life to start from, or to keep (fit_half_life False);
    fit_half_life None: fitted when the data carry ask times.  pseudo: pseudo-outcomes added
    to the likelihood (an online refit's shrinkage, fit/pseudo_outcomes.py).  ranges: name ->
    (low, high) on the natural scale, narrowing the search box (a node's parameter ranges).
    quadratic: (centre, precision) in theta, a Gaussian term added to the objective (the
    shrinkage's curvature floor, fit/pseudo_outcomes.py).
    """
    use_h = data.prior_asks is not None
    lik = SiteLikelihood(data, use_reporting_factor=True if pseudo is not None else None)
    start_h = float(start.ask_memory_half_life_s) if (
        start is not None and start.ask_memory_half_life_s) else float(half_life_s)
    load_at_start = lik.loads(SiteParams(1, 1, 0, 0, 0.5, 1.0, start_h))[0] if use_h else None
    fixed_values, reasons, notes = check_data(data, fix_k_busy, fix_k_load, notice_probability,
                                              load_at_start, penalised=pseudo is not None)
    if not use_h:
        reasons.setdefault("ask_memory_half_life_s", "the data carry no ask times (the robot's "
                           "ask_load column is used as it is)")
    elif fit_half_life is False:
        fixed_values["ask_memory_half_life_s"] = start_h
        reasons.setdefault("ask_memory_half_life_s", f"fixed at {start_h:g} s on request")
    for k, v in (fixed or {}).items():
        fixed_values[k] = v
        reasons.setdefault(k, "fixed by the caller")
    if start is None:
        a, b = moments_start(data)
        start = SiteParams(a, b, 0.5, 0.3, notice_probability if 0 < notice_probability < 1
                           else 0.5, 0.5, start_h)
    # the fixed values last: a half-life fixed on request (or by the caller) wins over start_h
    start = replace(start, **{"ask_memory_half_life_s": start_h, **fixed_values})
    theta0 = to_theta(start)
    free = np.array([name not in fixed_values for name in NAMES])
    if not lik.use_reporting_factor:
        free[5] = False
    if not use_h or not free[3]:
        free[H] = False          # no ask times, or no load effect: h does nothing
        if use_h and not free[3]:
            reasons.setdefault("ask_memory_half_life_s", "k_load is fixed at "
                               f"{start.k_load:g}: the half-life is kept at {start_h:g} s")
    bounds_all = theta_bounds(ranges)
    theta0 = np.clip(theta0, [b[0] for b in bounds_all], [b[1] for b in bounds_all])
    liks = [lik] if pseudo is None else [lik, SiteLikelihood(pseudo, use_reporting_factor=True)]
    obj = Objective(liks, free, theta0, half_life=use_h, quadratic=quadratic)
    prog = progress or Progress("fit", enabled=False)
    log = IterationLog(obj, lambda ll: prog.step(f"log-likelihood {ll:.3f}"))
    res = optimize.minimize(log, theta0[free], jac=True, method="L-BFGS-B",
                            bounds=[b for b, f in zip(bounds_all, free) if f],
                            callback=log.callback,
                            options={"maxiter": max_iter, "ftol": 1e-13, "gtol": 1e-7})
    theta = obj.full(res.x)
    grad = np.zeros(len(NAMES))
    grad[free] = -np.asarray(res.jac)            # L-BFGS-B's last gradient is at res.x
    ll = -float(res.fun) if res.fun < 1e300 else obj.loglik_theta(theta)
    prog.done(f"log-likelihood {ll:.3f}")
    lows, highs = np.array([b[0] for b in bounds_all]), np.array([b[1] for b in bounds_all])
    if free[H] and theta[3] <= lows[3] + BOUND_SLACK and grad[3] <= 0.0:
        # k_load ended at 0: the load does nothing, so its half-life is not identified
        free[H] = False
        theta[H], grad[H] = theta0[H], 0.0
        reasons["ask_memory_half_life_s"] = (f"not identified: k_load is 0 (asks leave no "
                                             f"lasting effect); kept at {start_h:g} s")
        notes.append(reasons["ask_memory_half_life_s"])
    params = obj.params(theta)
    for k, v in fixed_values.items():       # exact fixed values (no logit round trip)
        params = replace(params, **{k: v})
    if not use_h:
        params = replace(params, ask_memory_half_life_s=None)
    free_idx = np.flatnonzero(free)
    free_names = tuple(NAMES[i] for i in free_idx)
    at_bound = []
    for i, (name, f) in enumerate(zip(NAMES, free)):
        if f and (theta[i] <= bounds_all[i][0] + BOUND_SLACK
                  or theta[i] >= bounds_all[i][1] - BOUND_SLACK):
            at_bound.append(name)
        elif f and i in (4, 5) and abs(theta[i]) > LOGIT_AT_LIMIT:
            at_bound.append(name)
    strength = params.prior_a + params.prior_b
    if strength > 1000.0:
        notes.append(f"willingness shows no detectable spread across people (prior_a + prior_b "
                     f"= {strength:.3g}): with this prior the node would barely learn per person; "
                     "collect more asks per person before using it")
    # curvature on every free coordinate: the verdict needs it, the standard errors reuse it
    # (central differences for those; one-sided, half the gradients, for the verdict alone)
    hess = hessian_by_differences(lambda t: obj.loglik_and_grad(t)[1], theta, free_idx,
                                  lower=lows, upper=highs, central=standard_errors,
                                  grad_at_z=grad)
    coords = coordinates(bounds_all)
    verdict = assess_convergence([coords[i] for i in free_idx], theta[free_idx], ll,
                                 grad[free_idx], hess[np.ix_(free_idx, free_idx)], log.history,
                                 max_iter, str(res.message))
    fit = SiteFit(params, ll, free_names, reasons, iterations=int(res.nit), messages=notes,
                  at_bound=tuple(at_bound), n_people=data.n_people, n_outcomes=data.n_outcomes,
                  verdict=verdict)
    if standard_errors:
        fit.std_errors = std_errors_from_hessian(hess, theta, free, at_bound)
    return fit


def std_errors_from_hessian(hess: np.ndarray, theta: np.ndarray, free: np.ndarray,
                            at_bound: list[str]) -> dict[str, float]:
    """Return standard errors from the observed information.

    Observed information (the log-likelihood's Hessian from central differences of the gradient) on
    the interior free coordinates; delta method to the natural scale.
    """
    idx = [i for i in range(len(NAMES)) if free[i] and NAMES[i] not in at_bound]
    if not idx:
        return {}
    try:
        cov = np.linalg.inv(-hess[np.ix_(idx, idx)])
    except np.linalg.LinAlgError:
        return {NAMES[i]: math.nan for i in idx}
    jac = natural_jacobian(theta)
    out = {}
    for col, i in enumerate(idx):
        var = cov[col, col]
        out[NAMES[i]] = float(jac[i] * math.sqrt(var)) if var > 0 else math.nan
    return out


@dataclass
class ContextTest:
    statistic: float
    df: int
    p_value: float               # naive chi-square(df)
    p_value_boundary: float      # chi-bar-square mixture for a null on the boundary k = 0
    loglik_null: float
    null_verdict: ConvergenceVerdict | None = None   # the fit with k = 0; the test needs both
    note: str = ""               # a caveat of the reference distribution, if any


def context_test(data: OutcomeData, full: SiteFit, notice_probability: float = 0.8
                 ) -> ContextTest | None:
    """Likelihood-ratio test of k_busy = k_load = 0 (only the terms that were free)."""
    tested = [k for k in ("k_busy", "k_load") if k in full.free]
    if not tested:
        return None
    start = replace(full.params, k_busy=0.0, k_load=0.0)
    null = fit_site(data, start=start, fixed=dict.fromkeys(tested, 0.0),
                    fix_k_busy="k_busy" not in full.free, fix_k_load="k_load" not in full.free,
                    notice_probability=full.params.notice_probability
                    if "notice_probability" not in full.free else notice_probability,
                    standard_errors=False)
    stat = max(0.0, 2.0 * (full.loglik - null.loglik))
    df = len(tested)
    p = float(stats.chi2.sf(stat, df))
    # each k >= 0: under the null the statistic is a mixture of chi-square(0..df) with
    # binomial(df, 1/2) weights (independent components; Self and Liang 1987)
    weights = stats.binom.pmf(np.arange(df + 1), df, 0.5)
    p_bar = float(sum(w * (stats.chi2.sf(stat, j) if j > 0 else float(stat <= 0))
                      for j, w in enumerate(weights)))
    note = ""
    if "k_load" in tested and "ask_memory_half_life_s" in full.free:
        # the half-life exists only under the alternative (Davies 1977): the chi-square
        # reference then understates the statistic's spread, so p is somewhat too small
        note = ("the ask-memory half-life is fitted only when k_load > 0, so the p-values "
                "are approximate (somewhat too small)")
    return ContextTest(stat, df, p, p_bar, null.loglik, null.verdict, note)
