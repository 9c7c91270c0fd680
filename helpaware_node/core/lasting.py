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

"""The lasting cost of an ask: what it takes from the person's later requests (docs/decision.md).

An ask now adds 2^(-s/h) to the person's ask load s seconds later (h: ask memory half-life),
on top of their present load f, which decays the same way: f 2^(-s/h). At a typical later
request the advantage of the best choice with this person is (the U of the information value,
here with an ask load L)

    U(L) = max(0, alpha e^(-k L) - beta - gamma L),
    alpha = cbar m (Cbar - t_help + t_ask),  beta = t_ask + Ibar,  gamma = w_I repeat_cost,

with k = k_load, cbar = exp(-k_busy xbar), Ibar = w_I (1 + busy_cost xbar) and m the belief
mean. The person is a candidate at later requests at rate r (the rate of N: the Gamma-Poisson
mean, at most the robot's hourly ask cap), each weighted by e^(-s/tau) up to the look-ahead
horizon H, exactly as N counts them, so

    lasting_cost = r * integral_0^H e^(-s/tau) [U(f u(s)) - U((f + 1) u(s))] ds,  u = 2^(-s/h).

U is decreasing and convex; L* (U(L*) = 0, by Lambert's W function) splits the integral into
the part where both loads leave a positive advantage (drop alpha (e^(-k f u) - e^(-k (f+1) u))
+ gamma u) and the part where only the load without the ask does (drop U(f u)). Each piece is
closed form through

    K(s, c) = integral_s^inf e^(-t/tau) e^(-c u(t)) dt = tau e^(-s/tau) D(rho, c u(s)),
    D(rho, x) = rho integral_0^1 t^(rho-1) e^(-x t) dt = e^(-x) M(1, rho + 1, x)
              = Gamma(rho + 1) x^(-rho) P(rho, x),            rho = h / (tau ln 2),

(substitute t = u(s')/u(s): rho times a lower incomplete gamma function over x^rho, NIST DLMF
8.2.1, which DLMF 8.5.1 writes with Kummer's function M; the DLMF numbers are from memory and
test/test_lasting_cost.py checks each identity numerically; M is scipy.special.hyp1f1, P
scipy.special.gammainc), and
integral e^(-s/tau) u(s) ds = e^(-kappa s) / kappa, kappa = 1/tau + ln 2 / h.
test/test_lasting_cost.py checks the whole against scipy.integrate.quad.
"""
from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

LN2 = math.log(2.0)
_SERIES_MAX_X = 700.0     # e^(-x) M(1, rho + 1, x) in double range (M <= e^x)
_NEWTON_STEPS = 8         # each Newton use starts close: converged after 3 or 4 steps


Floats = NDArray[np.float64]


def decay_mean(rho: float, x: ArrayLike) -> Floats:
    """D(rho, x) = rho int_0^1 t^(rho-1) e^(-x t) dt in [0, 1], for x >= 0 (vectorised)."""
    x = np.asarray(x, dtype=float)
    if not np.any(x > _SERIES_MAX_X):
        out: Floats = np.exp(-x) * special.hyp1f1(1.0, rho + 1.0, x)
        return out
    small = x <= _SERIES_MAX_X
    xs = np.where(small, x, 0.0)
    xl = np.where(small, 1.0, x)
    series = np.exp(-xs) * special.hyp1f1(1.0, rho + 1.0, xs)
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        # x > 700: Gamma(rho+1) x^-rho P(rho, x) when rho < x (no overflow there); with
        # rho >= x > 700 the value is at most rho e^(-x), below every double that matters
        p = special.gammainc(rho, xl)
        big = np.where((rho < xl) & (p > 0.0),
                       np.exp(special.gammaln(rho + 1.0) - rho * np.log(xl)) * p, 0.0)
    return np.where(small, series, big)


def _root(alpha: Floats, beta: Floats, gamma: Floats, k: float) -> Floats:
    """L* > 0 with alpha e^(-k L) = beta + gamma L, where the left side starts above.

    With z = k L + s, s = k beta / gamma, the equation is z e^z = (k alpha / gamma) e^s, so
    z is Lambert's W0 of the right side (scipy.special.lambertw) and L* = (z - s) / k. That
    subtraction loses about 1e-16 s of L*, so it is used for s <= 50 only; beyond double
    range (xi = log of the right side >= 700) z solves z + ln z = xi by Newton's method from
    xi - ln xi; below xi = -25 (k near 0) W's series x - x^2 + 3/2 x^3 divided by k term by
    term. For s > 50 (gamma L small beside beta) Newton's method on
    g(L) = alpha e^(-k L) - beta - gamma L itself, from ln(alpha / beta) / k: g is convex and
    decreasing, so after the first step the iterates rise to the root. k = 0 and gamma = 0
    have their own closed forms.
    """
    if k == 0.0:
        return (alpha - beta) / gamma          # gamma > 0: else U never reaches 0
    L = np.empty_like(alpha)
    with np.errstate(divide="ignore", over="ignore"):    # tiny gamma: shift = inf, flat path
        shift = np.where(gamma > 0.0, k * beta / np.where(gamma > 0.0, gamma, 1.0), np.inf)
        xi = math.log(k) + np.log(alpha) - np.log(np.where(gamma > 0.0, gamma, 1.0)) + shift
    # a tiny argument x = e^xi (k near zero): W(x) / k by its series, x / k = (alpha / gamma) e^s,
    # never dividing W of a subnormal x by a subnormal k (that loses all digits)
    tiny = (shift <= 50.0) & (xi < -25.0)
    if tiny.any():
        x = np.exp(xi[tiny])
        per_k = alpha[tiny] / gamma[tiny] * np.exp(shift[tiny])
        L[tiny] = per_k * (1.0 - x + 1.5 * x * x) - beta[tiny] / gamma[tiny]
    lambert = (shift <= 50.0) & (xi < 700.0) & ~tiny
    if lambert.any():
        L[lambert] = (special.lambertw(np.exp(xi[lambert])).real - shift[lambert]) / k
    huge = (shift <= 50.0) & (xi >= 700.0)
    if huge.any():
        big = xi[huge]
        z = big - np.log(big)
        for _ in range(_NEWTON_STEPS):
            z = z - (z + np.log(z) - big) / (1.0 + 1.0 / z)
        L[huge] = (z - shift[huge]) / k
    flat = shift > 50.0                        # beta > 0 here
    if flat.any():
        a, b, g = alpha[flat], beta[flat], gamma[flat]
        x = np.log(a / b) / k
        for _ in range(_NEWTON_STEPS):
            e = a * np.exp(-k * x)
            x = x + (e - b - g * x) / (k * e + g)
        L[flat] = x
    return L


def lasting_cost(rate_per_s: ArrayLike, alpha: ArrayLike, beta: ArrayLike, gamma: ArrayLike,
                 k_load: float, load: ArrayLike, half_life_s: float, discount_s: float,
                 horizon_s: float) -> Floats:
    """Return the lasting cost of one more ask now, in robot-seconds.

    Expected discounted loss, in robot-seconds, that one more ask now causes at the person's later
    requests within the horizon (module doc). Vectorised over candidates.
    """
    # nobody live (no later requests, or no advantage to lose): zeros, without broadcasting
    # five arrays first (the decision's usual case when the robot may not ask)
    rate = np.asarray(rate_per_s, dtype=float)
    if horizon_s <= 0.0 or not rate.size or not rate.max() > 0.0 or not (
            (rate > 0.0) & (np.asarray(alpha, dtype=float) > np.asarray(beta, dtype=float))).any():
        return np.zeros(np.broadcast(rate, alpha, beta, gamma, load).shape)
    rate, alpha, beta, gamma, load = (np.asarray(v, dtype=float) for v in np.broadcast_arrays(
        rate_per_s, alpha, beta, gamma, load))
    out = np.zeros(rate.shape)
    live = (rate > 0.0) & (alpha > beta)
    if horizon_s <= 0.0 or not live.any():
        return out
    rate, alpha, beta, gamma, load = rate[live], alpha[live], beta[live], gamma[live], load[live]
    h, tau, H, k = float(half_life_s), float(discount_s), float(horizon_s), float(k_load)
    rho = h / (tau * LN2)
    kappa = 1.0 / tau + LN2 / h
    top = load + 1.0
    # where does U reach 0? only below f + 1 does it matter (u <= 1)
    kink = alpha * np.exp(-k * top) - beta - gamma * top < 0.0
    lstar = np.full(rate.shape, np.inf)
    if kink.any():
        lstar[kink] = _root(alpha[kink], beta[kink], gamma[kink], k)
    with np.errstate(divide="ignore", over="ignore"):    # a subnormal L*: s is clipped to H
        s_a = np.where(lstar < top, h * np.log2(top / lstar), 0.0)      # (f+1) u = L*
        s_b = np.where(lstar < load, h * np.log2(load / lstar), 0.0)    # f u = L*
    s_a = np.clip(s_a, 0.0, H)
    s_b = np.clip(s_b, 0.0, H)
    kf, kf1 = k * load, k * top
    h_s = np.full(rate.shape, H)
    # K(s, c) = tau e^(-s/tau) D(rho, c u(s)) at the five (s, c) pairs the pieces need
    s_all = np.stack([s_a, s_a, h_s, h_s, s_b])
    c_all = np.stack([kf, kf1, kf, kf1, kf])
    ks = tau * np.exp(-s_all / tau) * decay_mean(rho, c_all * np.exp2(-s_all / h))
    k_a0, k_a1, k_h0, k_h1, k_b0 = ks
    e0 = tau * np.exp(-np.stack([s_a, s_b]) / tau)          # K(s, 0) at s_a, s_b
    e1 = np.exp(-kappa * np.stack([s_a, h_s, s_b])) / kappa  # int_s^inf e^(-t/tau) u(t) dt
    # region A, s in [s_a, H]: both loads leave a positive advantage
    both = alpha * ((k_a0 - k_a1) - (k_h0 - k_h1)) + gamma * (e1[0] - e1[1])
    # region B, s in [s_b, s_a]: only the load without this ask does
    one = alpha * (k_b0 - k_a0) - beta * (e0[1] - e0[0]) - gamma * load * (e1[2] - e1[0])
    out[live] = np.maximum(rate * (both + one), 0.0)   # a loss; clip only rounding noise
    return out
