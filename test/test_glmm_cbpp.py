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

"""Random-intercept logistic model by adaptive Gauss-Hermite quadrature.

Reference: lme4 dataset cbpp, glmer(cbind(incidence, size - incidence) ~ period + (1 | herd),
binomial); values from lme4's tests/glmer-1.R as quoted in test/data/REFERENCE_VALUES.md.
Cross-checks with scipy.integrate.quad.
"""
import math

from helpaware_node.fit.glmm import (
    new_group_help_probability,
    RandomInterceptLogit,
    sequential_help_probability,
)
import numpy as np
import pytest
from reference_tables import cbpp_design
from scipy import integrate, stats
from scipy.special import expit


@pytest.fixture(scope="module")
def cbpp():
    return cbpp_design()


def test_agq_reproduces_lme4_nagq25(cbpp):
    # lme4 tests/glmer-1.R, nAGQ = 25: tolerance 5e-4 as there
    fit = RandomInterceptLogit(*cbpp, nodes=25).fit()
    ref = [-1.39922533, -0.99140729, -1.12782185, -1.57946627]
    assert np.max(np.abs(fit.beta - ref)) < 5e-4
    assert fit.sigma == pytest.approx(0.6475, abs=2e-3)      # herd sd (REFERENCE_VALUES.md)
    assert fit.loglik == pytest.approx(-91.983, abs=5e-3)     # computed ML logLik there
    assert np.all(fit.std_errors > 0)


def test_laplace_reproduces_lme4_laplace(cbpp):
    # lme4 tests/glmer-1.R Laplace fit: -1.398535, -0.992335, -1.128675, -1.580374; sd 0.6421
    fit = RandomInterceptLogit(*cbpp, nodes=1).fit()
    assert np.max(np.abs(fit.beta - [-1.398535, -0.992335, -1.128675, -1.580374])) < 5e-4
    assert fit.sigma == pytest.approx(0.6421, abs=2e-3)
    assert fit.loglik == pytest.approx(-92.0, abs=0.1)


def test_agq_loglik_matches_numerical_integration(cbpp):
    # scipy.integrate.quad over the random intercept of each herd, at a point off the optimum
    inc, size, X, herd = cbpp
    beta, sigma = np.array([-1.2, -0.8, -1.0, -1.4]), 0.9
    model = RandomInterceptLogit(inc, size, X, herd, nodes=25)
    total = 0.0
    for h in np.unique(herd):
        m = herd == h
        eta, y, n = X[m] @ beta, inc[m], size[m]

        def f(u):
            p = expit(eta + u)
            return math.exp(np.sum(stats.binom.logpmf(y, n, p))) * stats.norm.pdf(u, 0, sigma)

        total += math.log(integrate.quad(f, -12, 12, epsabs=1e-15, epsrel=1e-12)[0])
    assert model.loglik(beta, math.log(sigma)) == pytest.approx(total, abs=1e-7)


def test_sequential_and_new_group_predictions_match_quad():
    # scipy.integrate.quad: P(y2 = 1 | y1) and P(y = 1) under u ~ N(0, sigma^2)
    beta, sigma = np.array([-0.5, 1.0]), 1.3
    X = np.array([[1.0, 0.2], [1.0, -0.4], [1.0, 0.9]])
    y = np.array([0.0, 1.0, 1.0])
    group = np.array([7, 7, 3])
    seq = sequential_help_probability(beta, sigma, X, group, y, nodes=60)
    eta = X @ beta
    prior = lambda u: stats.norm.pdf(u, 0, sigma)    # noqa: E731
    new0 = integrate.quad(lambda u: expit(eta[0] + u) * prior(u), -15, 15)[0]
    num = integrate.quad(lambda u: (1 - expit(eta[0] + u)) * expit(eta[1] + u) * prior(u), -15,
                         15)[0]
    den = integrate.quad(lambda u: (1 - expit(eta[0] + u)) * prior(u), -15, 15)[0]
    assert seq[0] == pytest.approx(new0, abs=1e-9)
    assert seq[1] == pytest.approx(num / den, abs=1e-9)
    assert new_group_help_probability(beta, sigma, X[:1], nodes=60)[0] == pytest.approx(new0,
                                                                                        abs=1e-9)
