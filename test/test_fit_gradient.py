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

"""The site fit's analytic gradient and its standard errors, against references outside it.

Sources named beside each check: the exact Beta moments E[w^k] = B(a + k, b) / B(a, b) and
their derivatives by scipy.special.digamma; scipy.optimize.approx_fprime (forward and
backward steps averaged: a central difference) of the likelihood itself; the Hessian of the
likelihood by scipy.differentiate.hessian (which never sees our gradient).
"""
import math

from helpaware_node.fit.pseudo_outcomes import pseudo_outcomes
from helpaware_node.fit.simulate_outcomes import simulate, simulate_with_asks
from helpaware_node.fit.site_fit import fit_site, NAMES, natural_jacobian, Objective, to_theta
from helpaware_node.fit.site_likelihood import (
    beta_rule,
    beta_rule_derivatives,
    SiteLikelihood,
    SiteParams,
)
from hypothesis import given, settings, strategies as st
import numpy as np
import pytest
from scipy import differentiate, optimize
from scipy.special import betaln, digamma

TRUTH = SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7, 3600.0)
# small tables, built once: with ask times (the half-life is a coordinate) and without
WITH_ASKS = simulate_with_asks(TRUTH, 40, 7, seed=21, unanswered=0.2).data
PLAIN = simulate(TRUTH, 40, 7, seed=22)
PSEUDO = pseudo_outcomes(TRUTH, 50.0)     # weighted people: an online refit's penalty


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 40), a=st.floats(0.05, 2000.0), b=st.floats(0.05, 2000.0))
def test_rule_derivatives_are_those_of_the_exact_beta_moments(n, a, b):
    # exact algebra: E[w^k] = B(a + k, b) / B(a, b), so d log E[w^k] / d a =
    # psi(a + k) - psi(a) - psi(a + b + k) + psi(a + b) and d / d b = psi(a + b) - psi(a + b + k)
    x, logw = beta_rule(n, a, b)
    dxa, dxb, dlwa, dlwb = beta_rule_derivatives(n, a, b)
    w = np.exp(logw)
    for k in range(2 * n):
        exact = math.exp(betaln(a + k, b) - betaln(a, b))
        xk, dxk = x ** k, k * x ** max(k - 1, 0)
        d_a = np.sum(w * (dlwa * xk + dxk * dxa)) / exact
        d_b = np.sum(w * (dlwb * xk + dxk * dxb)) / exact
        ref_a = digamma(a + k) - digamma(a) - digamma(a + b + k) + digamma(a + b)
        ref_b = digamma(a + b) - digamma(a + b + k)
        # relative to the size of the terms cancelling in the reference
        assert d_a == pytest.approx(ref_a, abs=1e-7 * (1 + abs(digamma(a)) + k / a))
        assert d_b == pytest.approx(ref_b, abs=1e-7 * (1 + k / b))


def central_difference(fun, z, step):
    """scipy.optimize.approx_fprime forward and backward, averaged (error O(step^2))."""
    return 0.5 * (optimize.approx_fprime(z, fun, step) + optimize.approx_fprime(z, fun, -step))


theta_points = st.tuples(
    st.floats(math.log(0.3), math.log(40.0)), st.floats(math.log(0.3), math.log(40.0)),
    st.floats(0.0, 4.0), st.floats(0.0, 3.0), st.floats(-3.0, 3.0), st.floats(-3.0, 3.0),
    st.floats(math.log(120.0), math.log(40000.0)))


@settings(max_examples=40, deadline=None)
@given(theta=theta_points, with_asks=st.booleans(), penalised=st.booleans())
def test_analytic_gradient_matches_approx_fprime_at_random_points(theta, with_asks, penalised):
    # every coordinate, the half-life included when the data carry ask times; the penalised
    # objective of an online refit (weighted pseudo-people) as well as the plain one
    data = WITH_ASKS if with_asks else PLAIN
    liks = [SiteLikelihood(data, use_reporting_factor=True)]
    if penalised:
        liks.append(SiteLikelihood(PSEUDO, use_reporting_factor=True))
    free = np.array([True] * 6 + [with_asks])
    th = np.array(theta)
    obj = Objective(liks, free, th, half_life=with_asks)
    z = th[free]
    value = lambda v: obj(v)[0]        # noqa: E731
    g = obj(z)[1]
    ref = central_difference(value, z, 1e-5)
    scale = 1.0 + np.abs(ref)
    assert np.all(np.abs(g - ref) <= 2e-5 * scale + 1e-6 * abs(value(z))), (g, ref)


def test_standard_errors_match_scipy_differentiate_hessian():
    # the fit's errors come from differences of the analytic gradient; the reference Hessian
    # is scipy.differentiate.hessian of the log-likelihood alone, carried back the same way
    data = simulate_with_asks(TRUTH, 100, 8, seed=5, unanswered=0.1).data
    fit = fit_site(data)
    assert fit.converged and "ask_memory_half_life_s" in fit.free
    lik = SiteLikelihood(data)
    free = np.array([name in fit.free for name in NAMES])
    theta = to_theta(fit.params)
    obj = Objective(lik, free, theta, half_life=True)

    def loglik(z):                       # scipy.differentiate evaluates many points at once
        flat = z.reshape(z.shape[0], -1)
        out = [-obj(flat[:, i])[0] for i in range(flat.shape[1])]
        return np.reshape(out, z.shape[1:])

    res = differentiate.hessian(loglik, theta[free], initial_step=1e-2, maxiter=3)
    hess = res.ddf
    cov = np.linalg.inv(-hess)
    jac = natural_jacobian(theta)[free]
    for i, name in enumerate(n for n in NAMES if n in fit.free):
        ref = jac[i] * math.sqrt(cov[i, i])
        assert fit.std_errors[name] == pytest.approx(ref, rel=2e-3), name
