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

"""Random-intercept logistic regression by adaptive Gauss-Hermite quadrature.

    y_j ~ Binomial(n_j, expit(X_j beta + u_g)),   u_g ~ N(0, sigma^2), one u per group g.
Each group's integral over u is centred at the mode of its integrand (Newton, vectorised
over groups) and scaled by the curvature there, then evaluated with K Gauss-Hermite nodes
(adaptive GHQ; K = 1 is the Laplace approximation).  Parameters (beta, log sigma) are found
by L-BFGS-B on central-difference gradients of that smooth objective.  Binomial
coefficients are included, so the log-likelihood compares with lme4's logLik.  Whether the fit
reached its maximum is judged from the solution (fit/convergence.py), as for the site fit.
"""
from __future__ import annotations

from dataclasses import dataclass
import math

import numpy as np
from scipy import optimize
from scipy.special import expit, gammaln, roots_hermite

from .convergence import (
    assess_convergence,
    ConvergenceVerdict,
    Coordinate,
    hessian_by_differences,
    IterationLog,
)
from .progress import Progress
from .site_likelihood import logsumexp


@dataclass
class GlmmFit:
    beta: np.ndarray
    sigma: float
    loglik: float
    std_errors: np.ndarray          # beta then log sigma
    names: tuple[str, ...]
    iterations: int
    verdict: ConvergenceVerdict

    @property
    def converged(self) -> bool:
        return self.verdict.converged


SIGMA_BOUNDS = (1e-4, 50.0)
# a random-intercept sd below this (logit scale) counts as 0: a singular fit, which is an
# answer; the optimiser only creeps towards log sigma = -inf, as L-BFGS-B does towards a bound
SIGMA_AT_ZERO = 1e-3


class RandomInterceptLogit:

    def __init__(self, y, n, X, group, nodes: int = 25):
        self.y = np.asarray(y, float)
        self.n = np.asarray(n, float)
        self.X = np.asarray(X, float)
        _, self.g = np.unique(np.asarray(group), return_inverse=True)
        self.G = int(self.g.max()) + 1
        self.z, w = roots_hermite(nodes)
        self.logw = np.log(w)
        self.const = float(np.sum(gammaln(self.n + 1) - gammaln(self.y + 1)
                                  - gammaln(self.n - self.y + 1)))
        self.mode = np.zeros(self.G)

    def _sum_g(self, v):
        return np.bincount(self.g, v, minlength=self.G)

    def _modes(self, eta0, sigma):
        u = self.mode.copy()
        inv_var = 1.0 / (sigma * sigma)
        for _ in range(100):
            p = expit(eta0 + u[self.g])
            d1 = self._sum_g(self.y - self.n * p) - u * inv_var
            d2 = -self._sum_g(self.n * p * (1 - p)) - inv_var
            step = d1 / d2
            u = u - np.clip(step, -5.0, 5.0)
            if np.max(np.abs(step)) < 1e-11:
                break
        p = expit(eta0 + u[self.g])
        d2 = -self._sum_g(self.n * p * (1 - p)) - inv_var
        self.mode = u
        return u, 1.0 / np.sqrt(-d2)

    def loglik(self, beta, log_sigma) -> float:
        sigma = math.exp(log_sigma)
        eta0 = self.X @ beta
        mu, s = self._modes(eta0, sigma)
        u = mu[:, None] + math.sqrt(2.0) * s[:, None] * self.z[None, :]      # (G, K)
        eta = eta0[:, None] + u[self.g]                                      # (rows, K)
        rowll = self.y[:, None] * eta - self.n[:, None] * np.logaddexp(0.0, eta)
        grp = np.zeros((self.G, self.z.size))
        np.add.at(grp, self.g, rowll)
        grp += -0.5 * (u / sigma) ** 2 - math.log(sigma) - 0.5 * math.log(2 * math.pi)
        terms = grp + self.logw[None, :] + (self.z ** 2)[None, :]
        ll = logsumexp(terms, axis=1) + np.log(math.sqrt(2.0) * s)
        return float(np.sum(ll)) + self.const

    def _obj(self, theta):
        return -self.loglik(theta[:-1], theta[-1])

    def _grad(self, theta, h=1e-5):
        g = np.zeros_like(theta)
        for i in range(theta.size):
            tp, tm = theta.copy(), theta.copy()
            tp[i] += h
            tm[i] -= h
            g[i] = (self._obj(tp) - self._obj(tm)) / (2 * h)
        return g

    def start(self) -> np.ndarray:
        """Plain logistic regression (a few Newton steps) and sigma = 0.5."""
        beta = np.zeros(self.X.shape[1])
        for _ in range(25):
            p = expit(self.X @ beta)
            W = self.n * p * (1 - p) + 1e-9
            grad = self.X.T @ (self.y - self.n * p)
            hess = self.X.T @ (self.X * W[:, None])
            step = np.linalg.solve(hess + 1e-9 * np.eye(beta.size), grad)
            beta += step
            if np.max(np.abs(step)) < 1e-10:
                break
        return np.append(beta, math.log(0.5))

    def coordinates(self, names: tuple[str, ...]) -> list[Coordinate]:
        return [Coordinate(n) for n in names] + [Coordinate(
            "sigma", low=math.log(SIGMA_AT_ZERO), high=math.log(SIGMA_BOUNDS[1]) - 1e-8,
            low_natural=True, scale="log",
            high_hint="the groups differ more than a normal random intercept describes: "
                      "check the grouping column")]

    def fit(self, names=None, progress: Progress | None = None, max_iter: int = 200,
            standard_errors: bool = True) -> GlmmFit:
        theta0 = self.start()
        prog = progress or Progress("glmm", enabled=False)
        bounds = [(None, None)] * (theta0.size - 1) + [tuple(math.log(b) for b in SIGMA_BOUNDS)]
        log = IterationLog(lambda t: (self._obj(t), self._grad(t)),
                           lambda ll: prog.step(f"log-likelihood {ll:.3f}"))
        res = optimize.minimize(log, theta0, jac=True, method="L-BFGS-B", bounds=bounds,
                                callback=log.callback,
                                options={"maxiter": max_iter, "ftol": 1e-14, "gtol": 1e-7})
        theta = res.x
        ll = -self._obj(theta)
        prog.done(f"log-likelihood {ll:.3f}")
        k = theta.size
        names = tuple(names) if names else tuple(f"b{i}" for i in range(k - 1))
        # Hessian of the log-likelihood from differences of the gradient: the verdict needs
        # it, the standard errors reuse it (central for those; sigma > 0 is defined past its
        # search bound)
        grad = -np.asarray(res.jac)                # L-BFGS-B's last gradient is at res.x
        hess = hessian_by_differences(lambda t: -self._grad(t), theta, range(k),
                                      central=standard_errors, grad_at_z=grad)
        verdict = assess_convergence(self.coordinates(names), theta, ll, grad, hess,
                                     log.history, max_iter, str(res.message))
        se = np.full(k, math.nan)
        if standard_errors:
            try:
                se = np.sqrt(np.maximum(np.diag(np.linalg.inv(-hess)), 0.0))
            except np.linalg.LinAlgError:
                pass
        return GlmmFit(theta[:-1].copy(), float(math.exp(theta[-1])), ll, se, names,
                       int(res.nit), verdict)


def sequential_help_probability(beta, sigma, X, group, y, nodes: int = 40) -> np.ndarray:
    """P(y_j = 1) for Bernoulli rows given only the same group's earlier rows (row order).

    Integrating u over its posterior with Gauss-Hermite nodes on the N(0, sigma^2) prior.
    """
    z, w = roots_hermite(nodes)
    u = math.sqrt(2.0) * sigma * z
    logw = np.log(w) - 0.5 * math.log(math.pi)
    _, g = np.unique(np.asarray(group), return_inverse=True)
    order = np.argsort(g, kind="stable")
    gs, eta = g[order], (np.asarray(X, float) @ beta)[order]
    ys = np.asarray(y, float)[order]
    etak = eta[:, None] + u[None, :]
    logp = np.where(ys[:, None] > 0.5, -np.logaddexp(0.0, -etak), -np.logaddexp(0.0, etak))
    cum = np.cumsum(logp, axis=0)
    starts = np.flatnonzero(np.r_[True, gs[1:] != gs[:-1]])
    first = np.repeat(starts, np.diff(np.r_[starts, gs.size]))
    excl = cum - logp - (cum[first] - logp[first]) + logw[None, :]
    post = np.exp(excl - logsumexp(excl, axis=1, keepdims=True))
    out = np.empty(gs.size)
    out[order] = np.sum(post * expit(etak), axis=1)
    return out


def new_group_help_probability(beta, sigma, X, nodes: int = 40) -> np.ndarray:
    z, w = roots_hermite(nodes)
    eta = np.asarray(X, float) @ beta
    return expit(eta[:, None] + math.sqrt(2.0) * sigma * z[None, :]) @ (w / math.sqrt(math.pi))
