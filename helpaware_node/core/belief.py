"""Beta belief over one person's willingness, and its updates (DESIGN.md section 3).

A helped ask is conjugate: (a, b) -> (a + 1, b) whatever the context.  A declined ask at
context factor c has the exact posterior (1 - c w) Beta(w; a, b) / Z, a two-Beta mixture; we
keep a Beta by matching its mean and variance, so the posterior mean stays exact.  Every
function here accepts scalars or numpy arrays of the same shape (vectorised over candidates).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .model import CoreInputError, SiteModel, check_range


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


def beta_raw_moments(a, b):
    """E[w], E[w^2], E[w^3] of Beta(a, b), from the ratio B(a+k, b)/B(a, b)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    s = a + b
    m1 = a / s
    m2 = m1 * (a + 1.0) / (s + 1.0)
    m3 = m2 * (a + 2.0) / (s + 2.0)
    return m1, m2, m3


def declined_moments(a, b, c):
    """Mean and variance of the exact posterior  ∝ (1 - c w) Beta(w; a, b).

    E[w^k | declined] = [B(a+k, b) - c B(a+k+1, b)] / [B(a, b) - c B(a+1, b)]
                      = (m_k - c m_{k+1}) / (1 - c m_1)   with m_k the Beta raw moments.
    """
    m1, m2, m3 = beta_raw_moments(a, b)
    c = np.asarray(c, dtype=float)
    z = 1.0 - c * m1
    e1 = (m1 - c * m2) / z
    e2 = (m2 - c * m3) / z
    return e1, e2 - e1 * e1


def match_beta(mean, variance, fallback_concentration):
    """Beta(a, b) with the given mean and variance.

    Where rounding leaves no valid variance (0 < v < m(1-m)), keep the mean and the
    fallback concentration a + b, so the result is always a valid Beta.
    """
    mean = np.asarray(mean, dtype=float)
    variance = np.asarray(variance, dtype=float)
    limit = mean * (1.0 - mean)
    ok = (variance > 0.0) & (variance < limit)
    s = np.where(ok, limit / np.where(ok, variance, 1.0) - 1.0, fallback_concentration)
    return mean * s, (1.0 - mean) * s


def declined_ab(a, b, c):
    """(a, b) after a declined ask at context factor c in [0, 1] (moment-matched, vectorised)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    c = np.asarray(c, dtype=float)
    mean, var = declined_moments(a, b, c)
    na, nb = match_beta(mean, var, a + b)
    # c = 0 carries no information: keep the belief bit for bit
    na = np.where(c <= 0.0, a, na)
    nb = np.where(c <= 0.0, b, nb)
    return na, nb


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
    return 2.0 ** (-max(dt_s, 0.0) / half_life_s)


def forget(belief: Belief, prior: Belief, dt_s: float, half_life_s: float) -> Belief:
    """(a, b) <- (a0, b0) + L ((a, b) - (a0, b0)): evidence fades towards the prior."""
    lam = forgetting_factor(dt_s, half_life_s)
    if lam == 1.0:
        return belief
    return Belief(prior.a + lam * (belief.a - prior.a), prior.b + lam * (belief.b - prior.b))


def predictive_help(belief: Belief, c: float) -> float:
    """p = c * a / (a + b): probability the person helps when asked in context c."""
    return _check_c(c) * belief.mean
