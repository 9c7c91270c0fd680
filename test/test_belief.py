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

"""Beta belief updates checked against outside references (each named beside its check)."""
import math

from helpaware_node.core import Belief, CoreInputError, SiteModel
from helpaware_node.core.belief import (
    declined_ab,
    declined_moments,
    forget,
    predictive_help,
    update_declined,
    update_helped,
    update_no_response,
)
from helpaware_node.core.context import context_factor
from hypothesis import given, strategies as st
import numpy as np
import pytest
from scipy import integrate, stats
from scipy.special import beta as beta_fn


@pytest.mark.parametrize("a,b", [(1.0, 1.0), (2.0, 3.0), (0.4, 7.5), (30.0, 2.0)])
def test_beta_moments_match_scipy(a, b):
    # Reference: scipy.stats.beta mean and variance.
    belief = Belief(a, b)
    assert belief.mean == pytest.approx(stats.beta(a, b).mean(), rel=1e-12)
    assert belief.variance == pytest.approx(stats.beta(a, b).var(), rel=1e-12)


def test_declined_worked_case_from_reference_data():
    # Reference: test/data/REFERENCE_VALUES.md, "Exact results usable as oracles":
    # a = 2, b = 3, c = 0.6 -> Z = 0.76, mean = 7/19, variance 0.0371983,
    # moment-matched Beta(1.93617, 3.31915).
    mean, var = declined_moments(2.0, 3.0, 0.6)
    assert 1 - 0.6 * 2 / 5 == pytest.approx(0.76)
    assert float(mean) == pytest.approx(7 / 19, abs=1e-12)
    assert float(var) == pytest.approx(0.0371983, abs=5e-8)
    post = update_declined(Belief(2.0, 3.0), 0.6)
    assert post.a == pytest.approx(1.93617, abs=5e-6)
    assert post.b == pytest.approx(3.31915, abs=5e-6)


def test_declined_moments_match_beta_function_form():
    # Reference: the closed form E[w^k] = [B(a+k,b) - c B(a+k+1,b)] / [B(a,b) - c B(a+1,b)]
    # (test/data/REFERENCE_VALUES.md), evaluated with scipy.special.beta.
    a, b, c = 3.3, 1.7, 0.45
    z = beta_fn(a, b) - c * beta_fn(a + 1, b)
    e1 = (beta_fn(a + 1, b) - c * beta_fn(a + 2, b)) / z
    e2 = (beta_fn(a + 2, b) - c * beta_fn(a + 3, b)) / z
    mean, var = declined_moments(a, b, c)
    assert float(mean) == pytest.approx(e1, rel=1e-12)
    assert float(var) == pytest.approx(e2 - e1 ** 2, rel=1e-10)


def test_declined_against_numerical_integration_of_exact_posterior():
    # Reference: scipy.integrate.quad of (1 - c w) Beta(w; a, b) for many random (a, b, c).
    rng = np.random.default_rng(20261201)
    for _ in range(60):
        a, b = rng.uniform(0.3, 20.0, size=2)
        c = rng.uniform(0.0, 1.0)
        dens = lambda w: (1 - c * w) * stats.beta.pdf(w, a, b)  # noqa: E731
        z = integrate.quad(dens, 0, 1, limit=200)[0]
        m1 = integrate.quad(lambda w: w * dens(w), 0, 1, limit=200)[0] / z
        m2 = integrate.quad(lambda w: w * w * dens(w), 0, 1, limit=200)[0] / z
        mean, var = declined_moments(a, b, c)
        assert float(mean) == pytest.approx(m1, rel=1e-7)
        assert float(var) == pytest.approx(m2 - m1 * m1, rel=1e-6)
        post = update_declined(Belief(a, b), c)
        # the projected Beta keeps the exact posterior's mean and variance
        assert post.mean == pytest.approx(m1, rel=1e-7)
        assert post.variance == pytest.approx(m2 - m1 * m1, rel=1e-6)


@pytest.mark.parametrize("a,b", [(1.0, 1.0), (2.0, 3.0), (0.5, 0.5), (12.0, 40.0)])
def test_exact_limits(a, b):
    # Exact algebra: c = 1 gives the conjugate Beta(a, b + 1); c = 0 carries no information;
    # "helped" is conjugate whatever c (test/data/REFERENCE_VALUES.md).
    belief = Belief(a, b)
    full = update_declined(belief, 1.0)
    assert full.a == pytest.approx(a, rel=1e-9)
    assert full.b == pytest.approx(b + 1.0, rel=1e-9)
    assert update_declined(belief, 0.0) == belief
    assert update_helped(belief) == Belief(a + 1.0, b)


def test_no_response_is_declined_with_scaled_context():
    belief = Belief(2.0, 3.0)
    assert update_no_response(belief, 0.6, 0.5) == update_declined(belief, 0.3)
    assert update_no_response(belief, 0.6, 0.0) == belief


def test_forgetting_limits():
    # Exact: L = 2^(-dt/H) is 1 at dt = 0 and tends to 0 as dt grows; H = 0 disables it.
    prior = Belief(2.0, 2.0)
    belief = Belief(9.0, 3.0)
    assert forget(belief, prior, 0.0, 3600.0) == belief
    far = forget(belief, prior, 1e9, 3600.0)
    assert far.a == pytest.approx(prior.a, abs=1e-12)
    assert far.b == pytest.approx(prior.b, abs=1e-12)
    half = forget(belief, prior, 3600.0, 3600.0)
    assert half.a == pytest.approx(2.0 + 0.5 * 7.0)
    assert half.b == pytest.approx(2.0 + 0.5 * 1.0)
    assert forget(belief, prior, 1e9, 0.0) == belief


def test_vectorised_update_equals_scalar_update():
    a = np.array([1.0, 2.0, 5.0])
    b = np.array([1.0, 3.0, 0.5])
    c = np.array([0.2, 0.6, 1.0])
    na, nb = declined_ab(a, b, c)
    for i in range(3):
        one = update_declined(Belief(a[i], b[i]), c[i])
        assert (na[i], nb[i]) == pytest.approx((one.a, one.b), rel=1e-14)


@pytest.mark.parametrize("bad", [math.nan, -0.1, 1.5, math.inf])
def test_bad_context_factor_is_refused_by_name(bad):
    with pytest.raises(CoreInputError, match=r"c: .* allowed range \[0, 1\]"):
        update_declined(Belief(1.0, 1.0), bad)
    with pytest.raises(CoreInputError, match="c:"):
        predictive_help(Belief(1.0, 1.0), bad)


@pytest.mark.parametrize("a,b", [(0.0, 1.0), (-1.0, 1.0), (math.nan, 1.0), (1.0, math.inf)])
def test_bad_belief_is_refused(a, b):
    with pytest.raises(CoreInputError, match=r"belief\.[ab]"):
        Belief(a, b)


def test_bad_site_model_names_the_field():
    with pytest.raises(CoreInputError,
                       match=r"notice_probability: 1.5 is outside the allowed range \[0, 1\]"):
        SiteModel(notice_probability=1.5)
    with pytest.raises(CoreInputError, match="prior_a"):
        SiteModel(prior_a=0.0)
    with pytest.raises(CoreInputError, match="k_busy: expected a number"):
        SiteModel(k_busy="2")


# -- one-person paths (the store's fold of one outcome) against the vectorised ones ----------

POSITIVE = st.floats(min_value=5e-324, max_value=1e12, allow_nan=False)
UNIT = st.one_of(st.floats(0.0, 1.0), st.sampled_from([0.0, 1.0, 5e-324, 1.0 - 2 ** -53]))


@given(a=POSITIVE, b=POSITIVE, c=UNIT)
def test_declined_ab_of_floats_is_bit_for_bit_the_vectorised_update(a, b, c):
    # exact: the float path repeats the array path's operations in the same order (IEEE 754)
    na, nb = declined_ab(a, b, c)
    va, vb = declined_ab(np.array([a]), np.array([b]), np.array([c]))
    assert (na, nb) == (float(va[0]), float(vb[0]))


@given(x=st.floats(allow_nan=True, allow_infinity=True, width=64),
       f=st.floats(allow_nan=True, allow_infinity=True, width=64),
       kb=st.floats(0.0, 10.0), kl=st.floats(0.0, 10.0))
def test_context_factor_of_floats_is_the_array_result_or_the_same_refusal(x, f, kb, kl):
    def run(*args):
        try:
            return context_factor(*args, kb, kl)
        except CoreInputError as exc:
            return str(exc)
    assert run(x, f) == run(np.array(x), np.array(f))
