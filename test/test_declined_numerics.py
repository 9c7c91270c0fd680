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

"""The declined / no-response update over the whole allowed range of a, b and c.

References, each named beside its check:
- exact rational arithmetic (Python's fractions): the posterior moments from the closed form
  E[w^k] = [B(a+k,b) - c B(a+k+1,b)] / [B(a,b) - c B(a+1,b)] = (m_k - c m_(k+1)) / (1 - c m_1),
  m_k the Beta raw moments (test/data/REFERENCE_VALUES.md, "Exact results usable as oracles").
  This is the route the code does NOT take (it cancels near a mean of 1 in floating point),
  so it checks the code's mixture algebra too;
- scipy.integrate.quad of the exact posterior (1 - c w) Beta(w; a, b), where quad is reliable.
"""
from fractions import Fraction
import math

from helpaware_node.core import Belief, SiteModel
from helpaware_node.core.belief import (
    declined_ab,
    declined_moments,
    update_declined,
    update_no_response,
)
from hypothesis import given, strategies as st
import numpy as np
import pytest
from scipy import integrate, stats
from scipy.special import beta as beta_fn

SMALLEST_NORMAL = 2.2250738585072014e-308
ULP = 2.0 ** -52


def exact_posterior(a: float, b: float, c: float):
    """(mean, 1 - mean, variance, matched a, matched b) in exact rational arithmetic."""
    a, b, c = Fraction(a), Fraction(b), Fraction(c)
    s = a + b
    m1 = a / s
    m2 = m1 * (a + 1) / (s + 1)
    m3 = m2 * (a + 2) / (s + 2)
    z = 1 - c * m1
    e1 = (m1 - c * m2) / z
    e2 = (m2 - c * m3) / z
    var = e2 - e1 * e1
    conc = e1 * (1 - e1) / var - 1
    return e1, 1 - e1, var, e1 * conc, (1 - e1) * conc


def rel_err(got: float, exact: Fraction) -> float:
    return float(abs(Fraction(float(got)) - exact) / exact)


SUBNORMAL_STEP = Fraction(5e-324)


def close(got: float, exact: Fraction, rel: float = 1e-14) -> bool:
    """Within `rel` of the exact value, or.

    Where the exact value is below the normal floats (which carry no relative accuracy there),
    within 8 steps of the subnormal spacing.
    """
    if exact >= SMALLEST_NORMAL:
        return rel_err(got, exact) < rel
    return abs(Fraction(float(got)) - exact) <= 8 * SUBNORMAL_STEP


# a, b log-uniform over the normal floats of the allowed range (0, 1e12]
normal_ab = st.floats(-300.0, 12.0).map(lambda e: 10.0 ** e)
# c anywhere in [0, 1], with the ends and their neighbourhoods drawn often
cs = st.one_of(st.floats(0.0, 1.0), st.floats(-300.0, 0.0).map(lambda e: 10.0 ** e),
               st.floats(-16.0, 0.0).map(lambda e: 1.0 - 10.0 ** e),
               st.sampled_from([0.0, 1.0, 0.5]))


def test_the_reported_cases_are_exact():
    # Exact algebra: c = 1 is the conjugate Beta(a, b + 1) (test/data/REFERENCE_VALUES.md).
    assert update_declined(Belief(1000.0, 1.0), 1.0) == Belief(1000.0, 2.0)
    na, nb = declined_ab(1000.0, 1e-6, 1.0)
    assert (float(na), float(nb)) == (1000.0, 1.000001)
    post = update_declined(Belief(1e6, 1e-6), 1.0)
    assert (post.a, post.b) == (1e6, 1e-6 + 1.0)
    # the variance of Beta(1e5, 1.001) was negative; now it matches fractions to 1e-14
    _, var = declined_moments(1e5, 1e-3, 1.0)
    assert rel_err(var, exact_posterior(1e5, 1e-3, 1.0)[2]) < 1e-14


@pytest.mark.parametrize("a,b,c", [(1000.0, 1.0, 0.999), (1000.0, 1e-6, 0.9999),
                                   (1e5, 1e-3, 0.5), (1e6, 1e-6, 1.0 - 1e-9),
                                   (1e12, 1e-290, 0.3), (1e-290, 1e12, 0.7),
                                   (1e12, 1e-300, 0.3), (1e-300, 1e12, 0.7)])
def test_near_a_mean_of_one_or_zero_against_fractions(a, b, c):
    # Reference: exact rational arithmetic (fractions), see the module docstring. In the last
    # four, 1 - mean (or the mean) and the variance are below the normal floats (~1e-312),
    # where `close` holds them to the fixed subnormal spacing instead.
    mean, var = declined_moments(a, b, c)
    na, nb = declined_ab(a, b, c)
    e1, q, v, ea, eb = exact_posterior(a, b, c)
    assert close(mean, e1)
    assert close(nb / (na + nb), q)     # 1 - mean, which 1 - mean cannot give near 1
    assert close(var, v)
    assert close(na, ea)
    assert close(nb, eb)


@given(normal_ab, normal_ab, cs)
def test_moments_and_matched_beta_equal_exact_rational_arithmetic(a, b, c):
    # Reference: exact rational arithmetic (fractions) over the whole normal range.
    mean, var = declined_moments(a, b, c)
    na, nb = declined_ab(a, b, c)
    e1, q, v, ea, eb = exact_posterior(a, b, c)
    assert close(mean, e1)
    assert close(nb / (na + nb), q)
    assert close(var, v)
    assert close(na, ea)
    assert close(nb, eb)


# the whole allowed range, subnormal a and b included
any_ab = st.one_of(normal_ab, st.floats(5e-324, 1e-300), st.just(5e-324), st.just(1e12))


@given(any_ab, any_ab, cs)
def test_invariants_hold_over_the_whole_range(a, b, c):
    # DESIGN.md section 3: a, b > 0; declined lowers the mean (keeps it at c = 0); the matched
    # mean is the exact posterior mean (fractions: it lies within rounding of it, below m).
    na, nb = declined_ab(a, b, c)
    mean, var = declined_moments(a, b, c)
    for v in (na, nb, mean, var):
        assert math.isfinite(float(v))
    assert float(na) > 0.0 and float(nb) > 0.0 and float(var) >= 0.0
    m_before = Fraction(a) / (Fraction(a) + Fraction(b))
    e1 = exact_posterior(a, b, c)[0]
    assert e1 <= m_before
    assert Fraction(float(mean)) <= m_before * (1 + 4 * Fraction(ULP)) + 2 * SUBNORMAL_STEP
    if c == 0.0:
        assert (float(na), float(nb)) == (a, b)


def test_no_response_update_is_exact_at_the_ends_too():
    # no response = declined at c * notice_probability (DESIGN.md section 3)
    belief = Belief(1000.0, 1.0)
    assert update_no_response(belief, 1.0, 1.0) == Belief(1000.0, 2.0)
    post = update_no_response(belief, 1.0, 0.8)
    e1, _, v, ea, eb = exact_posterior(1000.0, 1.0, 0.8)
    assert rel_err(post.a, ea) < 1e-14 and rel_err(post.b, eb) < 1e-14


def test_vectorised_over_the_range_equals_scalar_calls():
    rng = np.random.default_rng(7)
    a = 10.0 ** rng.uniform(-300, 12, 200)
    b = 10.0 ** rng.uniform(-300, 12, 200)
    c = np.concatenate([rng.uniform(0, 1, 196), [0.0, 1.0, 0.0, 1.0]])
    na, nb = declined_ab(a, b, c)
    mean, var = declined_moments(a, b, c)
    for i in range(200):
        one = declined_ab(a[i], b[i], c[i]) + declined_moments(a[i], b[i], c[i])
        assert (na[i], nb[i], mean[i], var[i]) == tuple(float(v) for v in one)


def _quad_posterior(a, b, c):
    """Z, E[w], E[1 - w], Var[w] of (1 - c w) Beta(w; a, b) by scipy.integrate.quad.

    The Beta weight w^(a-1) (1-w)^(b-1) is handed to QUADPACK's algebraic-weight rule
    (weight="alg"), which integrates endpoint singularities (a or b < 1) reliably.
    """
    kw = {"weight": "alg", "wvar": (a - 1.0, b - 1.0), "epsabs": 0.0, "epsrel": 1e-13,
          "limit": 200}
    z = integrate.quad(lambda w: 1.0 - c * w, 0.0, 1.0, **kw)[0]
    m = integrate.quad(lambda w: w * (1.0 - c * w), 0.0, 1.0, **kw)[0] / z
    q = integrate.quad(lambda w: (1.0 - w) * (1.0 - c * w), 0.0, 1.0, **kw)[0] / z
    v = integrate.quad(lambda w: (w - m) ** 2 * (1.0 - c * w), 0.0, 1.0, **kw)[0] / z
    return z, m, q, v


@pytest.mark.parametrize("seed", range(4))
def test_against_quadrature_of_the_exact_posterior(seed):
    # Reference: scipy.integrate.quad (QUADPACK QAWS, algebraic weight) of the exact posterior,
    # for a, b in [0.05, 40], the region where that rule is reliable (checked below against
    # scipy.special's normaliser Z = 1 - c a/(a+b), test/data/REFERENCE_VALUES.md).
    rng = np.random.default_rng(1000 + seed)
    for _ in range(15):
        a, b = 10.0 ** rng.uniform(math.log10(0.05), math.log10(40.0), 2)
        c = float(rng.choice([rng.uniform(0, 1), 1.0 - 10.0 ** rng.uniform(-12, -1)]))
        z, m, q, v = _quad_posterior(a, b, c)
        assert z / beta_fn(a, b) == pytest.approx(1.0 - c * a / (a + b), rel=1e-10)
        mean, var = declined_moments(a, b, c)
        na, nb = declined_ab(a, b, c)
        assert float(mean) == pytest.approx(m, rel=1e-9)
        assert float(nb / (na + nb)) == pytest.approx(q, rel=1e-9)
        assert float(var) == pytest.approx(v, rel=1e-8)


@pytest.mark.parametrize("a,b", [(2000.0, 1.5), (5e4, 3.0), (1.5, 3e3), (1e4, 1e4)])
def test_against_quadrature_at_concentrated_beliefs(a, b):
    # Reference: scipy.integrate.quad of (1 - c w) scipy.stats.beta.pdf(w; a, b), split at
    # the quantiles so the peak is resolved (checked: the pdf integrates to 1 there).
    quantiles = stats.beta.ppf([1e-6, 0.01, 0.25, 0.5, 0.75, 0.99, 1 - 1e-6], a, b)
    cuts = sorted({0.0, 1.0, *quantiles})

    def integral(f):
        return math.fsum(integrate.quad(lambda w: f(w) * stats.beta.pdf(w, a, b), lo, hi,
                                        epsabs=0.0, epsrel=1e-10, limit=200)[0]
                         for lo, hi in zip(cuts, cuts[1:]))

    assert integral(lambda w: 1.0) == pytest.approx(1.0, rel=1e-9)
    for c in (0.3, 0.9, 0.999999):
        z = integral(lambda w: 1.0 - c * w)
        m = integral(lambda w: w * (1.0 - c * w)) / z
        q = integral(lambda w: (1.0 - w) * (1.0 - c * w)) / z
        v = integral(lambda w: (w - m) ** 2 * (1.0 - c * w)) / z
        mean, var = declined_moments(a, b, c)
        na, nb = declined_ab(a, b, c)
        assert float(mean) == pytest.approx(m, rel=1e-9)
        assert float(nb / (na + nb)) == pytest.approx(q, rel=1e-7)
        assert float(var) == pytest.approx(v, rel=1e-6)


def test_worked_case_stays_and_the_site_prior_round_trips():
    # Reference: test/data/REFERENCE_VALUES.md worked case a = 2, b = 3, c = 0.6:
    # mean 7/19, variance 0.0371983, moment-matched Beta(1.93617, 3.31915).
    mean, var = declined_moments(2.0, 3.0, 0.6)
    assert float(mean) == pytest.approx(7 / 19, abs=1e-15)
    assert exact_posterior(2, 3, Fraction(3, 5))[0] == Fraction(7, 19)
    e1, _, v, ea, eb = exact_posterior(2.0, 3.0, 0.6)
    assert float(var) == pytest.approx(0.0371983, abs=5e-8)
    post = update_declined(Belief.prior(SiteModel(prior_a=2.0, prior_b=3.0)), 0.6)
    assert (post.a, post.b) == (pytest.approx(1.93617, abs=5e-6), pytest.approx(3.31915, abs=5e-6))
    assert rel_err(post.a, ea) < 1e-14 and rel_err(post.b, eb) < 1e-14
