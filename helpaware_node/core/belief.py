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

"""Beta belief over one person's willingness, and its updates (DESIGN.md section 3).

A helped ask is conjugate: (a, b) -> (a + 1, b) whatever the context.  A declined ask at
context factor c has the exact posterior (1 - c w) Beta(w; a, b) / Z, a two-Beta mixture; we
keep a Beta by matching its mean and variance, so the posterior mean stays exact.  Every
function here accepts scalars or numpy arrays of the same shape (vectorised over candidates).
"""
from __future__ import annotations

from dataclasses import dataclass
import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .model import check_range, CoreInputError, SiteModel


@dataclass(frozen=True)
class Belief:
    a: float
    b: float

    def __post_init__(self) -> None:
        check_range("belief.a", self.a, 0.0, 1e12, low_open=True)
        check_range("belief.b", self.b, 0.0, 1e12, low_open=True)

    @property
    def mean(self) -> float:
        return self.a / (self.a + self.b)

    @property
    def variance(self) -> float:
        s = self.a + self.b
        return self.a * self.b / (s * s * (s + 1.0))

    @classmethod
    def prior(cls, model: SiteModel) -> "Belief":
        return cls(model.prior_a, model.prior_b)


_TINY = float(np.nextafter(0.0, 1.0))
# 0/0 and overflow arise only at c = 1 with b/(a+b) underflowing, where the closed form is used
_AT_C_ONE_ONLY = {"divide": "ignore", "invalid": "ignore", "over": "ignore"}


Floats = NDArray[np.float64]


def _declined_mixture(a: ArrayLike, b: ArrayLike, c: ArrayLike) -> tuple[Floats, ...]:
    """Return the parts of the exact declined posterior, a two-Beta mixture, that never cancel.

    1 - c w = (1 - c) + c (1 - w) and (1 - w) Beta(w; a, b) = b/s Beta(w; a, b + 1), s = a + b:

        (1 - c w) Beta(w; a, b) / Z = [(1 - c) Beta(w; a, b) + c b/s Beta(w; a, b + 1)] / Z,
        Z = (1 - c) + c b/s = 1 - c a/s.

    Each part is a product or sum of positive terms, so it keeps its relative accuracy for a
    mean near 0 or 1 and for a, b anywhere in (0, 1e12]: no 1 - x is taken of an x near 1.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    c = np.asarray(c, dtype=float)
    s: Floats = a + b
    m0 = a / s                   # mean of Beta(a, b) ...
    n0 = b / s                   # ... and one minus it, each computed directly
    r1 = 1.0 / (s + 1.0)
    r2 = 1.0 / (s + 2.0)
    n1 = (b + 1.0) * r1          # one minus the mean a r1 of Beta(a, b + 1)
    k = 1.0 - c                  # weight of Beta(a, b) times Z; exact for c >= 1/2
    z = k + c * n0
    return a, b, c, s, m0, n0, r1, r2, n1, k, z


def declined_moments(a: ArrayLike, b: ArrayLike, c: ArrayLike) -> tuple[Floats, Floats]:
    """Mean and variance of the exact posterior  ∝ (1 - c w) Beta(w; a, b) (vectorised).

    mean = a/s [(1 - c) + c b/(s+1)] / Z; variance = the components' variances plus the
    spread of their means (a sum of positive terms). Algebraically equal to
    E[w^k] = [B(a+k,b) - c B(a+k+1,b)] / [B(a,b) - c B(a+1,b)] and E[w^2] - E[w]^2, which
    cancel catastrophically near a mean of 1.
    """
    a, b, c, s, m0, n0, r1, r2, n1, k, z = _declined_mixture(a, b, c)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        mean = m0 * ((k + c * b * r1) / z)
        # u0 v0 + u1 v1 + u0 u1 (a/(s(s+1)))^2, with a/s and b/(s Z) taken out of all three
        var = m0 * (n0 / z) * (k * r1 + c * s * r1 * n1 * r2 + k * c * m0 * r1 * r1 / z)
    return _exact_ends(c, mean, var, a * r1, a * r1 * n1 * r2, m0, m0 * n0 * r1)


def declined_mean(a: ArrayLike, b: ArrayLike, c: ArrayLike) -> Floats:
    """Return the mean of `declined_moments` alone, bit for bit (the decision needs no variance).

    The same operations as `_declined_mixture` and `declined_moments` in the same order (only
    those the mean uses), with the same closed forms at c = 0 and c = 1.
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    s = a + b
    return declined_mean_from(a, b, np.asarray(c, dtype=float), s, a / s, s + 1.0)


def declined_mean_from(a: Floats, b: Floats, c: Floats, s: Floats, m0: Floats,
                       s1: Floats) -> Floats:
    """Return `declined_mean` from parts the caller has: s = a + b, m0 = a / s, s1 = s + 1."""
    r1 = 1.0 / s1
    k = 1.0 - c
    z = k + c * (b / s)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        mean = m0 * ((k + c * b * r1) / z)
    out: Floats = np.where(c <= 0.0, m0, np.where(c >= 1.0, a * r1, mean))
    return out


def declined_ab(a: ArrayLike, b: ArrayLike, c: ArrayLike) -> tuple[Floats, Floats]:
    """Return (a, b) after a declined ask at context factor c in [0, 1] (moment-matched).

    The matched Beta has the posterior's mean M and variance V; its concentration is
    M(1-M)/V - 1 = E[w(1-w)]/V (as M(1-M) - V = E[w] - E[w^2]), a ratio of positive sums;
    a' = M times it and b' = (1 - M) times it, with a and b kept as factors.
    """
    if type(a) is float and type(b) is float and type(c) is float:
        return _declined_ab_one(a, b, c)
    a, b, c, s, m0, n0, r1, r2, n1, k, z = _declined_mixture(a, b, c)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # concentration / s, with the factor b/(s Z) of E[w(1-w)] and V cancelled
        ratio = (k * r1 + c * n1 * r2) / (k * r1 + c * s * r1 * n1 * r2
                                          + k * c * m0 * r1 * r1 / z)
        na = a * (ratio * ((k + c * b * r1) / z))
        nb = b * (ratio * ((k + c * n1) / z))
    # below the smallest positive double (a or b near 5e-324 already): hold there, so a, b > 0
    na, nb = np.maximum(na, _TINY), np.maximum(nb, _TINY)
    return _exact_ends(c, na, nb, a, b + 1.0, a, b)


def _declined_ab_one(a: float, b: float, c: float) -> tuple[float, float]:
    """declined_ab for one person (the store's fold of one outcome).

    The same operations in the same order on floats, so bit for bit the vectorised result
    (test_belief.py checks), without building arrays; 0 < c < 1 here, so z > 0 and nothing divides
    by zero.
    """
    if c <= 0.0:
        return a, b
    if c >= 1.0:
        return a, b + 1.0
    s = a + b
    m0 = a / s
    n0 = b / s
    r1 = 1.0 / (s + 1.0)
    r2 = 1.0 / (s + 2.0)
    n1 = (b + 1.0) * r1
    k = 1.0 - c
    z = k + c * n0
    ratio = (k * r1 + c * n1 * r2) / (k * r1 + c * s * r1 * n1 * r2 + k * c * m0 * r1 * r1 / z)
    na = a * (ratio * ((k + c * b * r1) / z))
    nb = b * (ratio * ((k + c * n1) / z))
    return max(na, _TINY), max(nb, _TINY)


def _exact_ends(c: Floats, mixed_a: Floats, mixed_b: Floats, full_a: Floats, full_b: Floats,
                none_a: Floats, none_b: Floats) -> tuple[Floats, Floats]:
    """Pick the closed forms at c = 0 (no information) and c = 1 (the conjugate Beta(a, b + 1)).

    Use the closed forms there (bit for bit, and no 0/0 where b/(a+b) underflows to 0).
    """
    return (np.where(c <= 0.0, none_a, np.where(c >= 1.0, full_a, mixed_a)),
            np.where(c <= 0.0, none_b, np.where(c >= 1.0, full_b, mixed_b)))


def _check_c(c: float, name: str = "c") -> float:
    return check_range(name, c, 0.0, 1.0)


def update_helped(belief: Belief) -> Belief:
    """Exact: P(help) = c w, so c cancels and the posterior is Beta(a + 1, b)."""
    return Belief(belief.a + 1.0, belief.b)


def update_declined(belief: Belief, c: float) -> Belief:
    c = _check_c(c)
    na, nb = declined_ab(belief.a, belief.b, c)
    return Belief(float(na), float(nb))


def update_no_response(belief: Belief, c: float, notice_probability: float) -> Belief:
    """As declined, with c' = c * notice_probability: the person may not have noticed."""
    c = _check_c(c)
    q = check_range("notice_probability", notice_probability, 0.0, 1.0)
    return update_declined(belief, c * q)


def forgetting_factor(dt_s: float, half_life_s: float) -> float:
    """L = 2^(-dt/H); H = 0 disables forgetting (L = 1). Negative dt counts as 0."""
    if half_life_s <= 0.0:
        return 1.0
    if math.isnan(dt_s):
        raise CoreInputError("dt_s: NaN is not a time interval")
    return float(2.0 ** (-max(dt_s, 0.0) / half_life_s))   # float: a negative base never occurs


def forget(belief: Belief, prior: Belief, dt_s: float, half_life_s: float) -> Belief:
    """Return (a, b) <- (a0, b0) + L ((a, b) - (a0, b0)): evidence fades towards the prior."""
    lam = forgetting_factor(dt_s, half_life_s)
    if lam == 1.0:
        return belief
    return Belief(prior.a + lam * (belief.a - prior.a), prior.b + lam * (belief.b - prior.b))


def predictive_help(belief: Belief, c: float) -> float:
    """Return p = c * a / (a + b): probability the person helps when asked in context c."""
    return _check_c(c) * belief.mean
