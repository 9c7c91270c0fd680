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

"""Site-model fit: marginal likelihood by Gauss-Jacobi quadrature, optimiser, SEs, LR test.

Outside sources named beside each check: BDA3 Table 5.1 with the computed Beta-binomial
reference values in test/data/REFERENCE_VALUES.md, scipy.stats.betabinom, scipy.special.betaln
(exact Beta moments), scipy.integrate.quad, scipy.optimize.check_grad, and the core's exact
one-step posterior mean.
"""
import math

from helpaware_node.core.belief import Belief, update_declined, update_no_response
from helpaware_node.core.model import SiteModel
from helpaware_node.fit.data import DECLINED, from_arrays, from_group_counts, HELPED, NO_RESPONSE
from helpaware_node.fit.simulate_outcomes import simulate, simulate_with_asks
from helpaware_node.fit.site_fit import context_test, fit_site, moments_start, Objective, to_theta
from helpaware_node.fit.site_likelihood import beta_rule, SiteLikelihood, SiteParams
import numpy as np
import pytest
from reference_tables import rat_tumour_groups
from scipy import integrate, optimize, stats
from scipy.special import betaln, gammaln


def first_70_rat_groups():
    y, n = rat_tumour_groups()
    return y[:70], n[:70]


def test_rat_tumour_reduces_to_beta_binomial():
    # BDA3 Table 5.1, first 70 groups; reference MLE (REFERENCE_VALUES.md): a = 2.3048,
    # b = 14.0798, log-likelihood without binomial coefficients -721.001
    y, n = first_70_rat_groups()
    fit = fit_site(from_group_counts(y, n))
    assert fit.params.prior_a == pytest.approx(2.3048, abs=6e-4)
    assert fit.params.prior_b == pytest.approx(14.0798, abs=6e-4)
    assert fit.loglik == pytest.approx(-721.001, abs=1e-3)
    assert fit.params.k_busy == 0.0 and fit.params.k_load == 0.0    # no context: fixed
    assert "k_busy" in fit.fixed and "k_load" in fit.fixed
    assert fit.std_errors["prior_a"] > 0 and fit.std_errors["prior_b"] > 0


def test_rat_tumour_method_of_moments_start():
    # BDA3 section 5.3 / REFERENCE_VALUES.md: mean and sd (ddof 1) of y/n give 1.356, 8.615
    y, n = first_70_rat_groups()
    a, b = moments_start(from_group_counts(y, n))
    assert a == pytest.approx(1.356, abs=1e-3)
    assert b == pytest.approx(8.615, abs=1e-3)


def test_loglik_matches_scipy_betabinom():
    # scipy.stats.betabinom.logpmf minus the log binomial coefficient, at points off the MLE
    y, n = first_70_rat_groups()
    lik = SiteLikelihood(from_group_counts(y, n))
    log_choose = gammaln(n + 1) - gammaln(y + 1) - gammaln(n - y + 1)
    for a, b in [(2.3048, 14.0798), (0.4, 0.7), (30.0, 200.0), (1.0, 1.0)]:
        ref = float(np.sum(stats.betabinom.logpmf(y, n, a, b) - log_choose))
        assert lik.loglik(SiteParams(a, b, 0.0, 0.0, 0.8)) == pytest.approx(ref, abs=1e-8)


@pytest.mark.parametrize("n,a,b", [(1, 2.0, 3.0), (8, 0.3, 0.6), (30, 2.3, 14.1),
                                   (25, 800.0, 3000.0)])
def test_gauss_jacobi_rule_is_exact_for_beta_moments(n, a, b):
    # exact algebra: E[w^k] = B(a + k, b) / B(a, b) (scipy.special.betaln), k <= 2n - 1
    x, logw = beta_rule(n, a, b)
    w = np.exp(logw)
    for k in range(2 * n):
        exact = math.exp(betaln(a + k, b) - betaln(a, b))
        assert np.sum(w * x ** k) == pytest.approx(exact, rel=1e-9)


def test_marginal_with_context_matches_numerical_integration():
    # scipy.integrate.quad of prod_j P(y_j | w) Beta(w; a, b) for one person, all three results
    x = [0.1, 0.8, 0.5, 0.0, 0.3]
    f = [0.0, 1.2, 0.4, 2.0, 0.0]
    r = [HELPED, DECLINED, NO_RESPONSE, HELPED, NO_RESPONSE]
    p = SiteParams(1.7, 2.4, 1.3, 0.6, 0.55)
    data = from_arrays(["p"] * 5, x, f, r)
    c = np.exp(-(p.k_busy * np.array(x) + p.k_load * np.array(f)))

    def integrand(w):
        val = stats.beta.pdf(w, p.prior_a, p.prior_b)
        for cj, rj in zip(c, r):
            val *= w * cj if rj == HELPED else (1 - w * cj) if rj == DECLINED \
                else (1 - w * cj * p.notice_probability)
        return val

    ref = math.log(integrate.quad(integrand, 0, 1, epsabs=1e-14, epsrel=1e-12)[0])
    lik = SiteLikelihood(data, use_reporting_factor=False)
    assert lik.loglik(p) == pytest.approx(ref, abs=1e-10)


@pytest.mark.parametrize("with_ask_times", [False, True])
def test_gradient_matches_finite_differences(with_ask_times):
    # scipy.optimize.check_grad against the analytic gradient (a0, b0 through the moving
    # Gauss-Jacobi nodes); with ask times the load is recomputed under each half-life
    truth = SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7, 3600.0)
    data = (simulate_with_asks(truth, 120, 8, seed=11, unanswered=0.2).data if with_ask_times
            else simulate(truth, 120, 8, seed=11))
    free = np.array([True] * 6 + [with_ask_times])
    obj = Objective(SiteLikelihood(data), free, to_theta(truth), half_life=with_ask_times)
    theta = (to_theta(truth) + np.array([0.2, -0.1, 0.3, -0.2, 0.4, -0.3, 0.5]))[free]
    fun = lambda z: obj(z)[0]          # noqa: E731
    grad = lambda z: obj(z)[1]         # noqa: E731
    g = grad(theta)
    err = optimize.check_grad(fun, grad, theta, epsilon=1e-6)
    assert err < 1e-3 * max(1.0, np.linalg.norm(g))
    assert np.linalg.norm(g) > 1.0     # not trivially zero away from the optimum


def test_parameter_recovery_within_three_standard_errors():
    # data simulated from the model's own generative story (fixed seed)
    truth = SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7)
    data = simulate(truth, 500, 10, seed=2024)
    fit = fit_site(data)
    assert fit.converged
    for name in ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
                 "decline_aloud"):
        est, se = getattr(fit.params, name), fit.std_errors[name]
        assert se > 0 and math.isfinite(se), name
        assert abs(est - getattr(truth, name)) < 3 * se, (name, est, se)
    # the fitted constants are a valid SiteModel
    SiteModel(prior_a=fit.params.prior_a, prior_b=fit.params.prior_b, k_busy=fit.params.k_busy,
              k_load=fit.params.k_load, notice_probability=fit.params.notice_probability)


def test_context_test_detects_and_accepts():
    strong = simulate(SiteParams(2.0, 3.0, 2.0, 0.8, 0.6, 0.7), 150, 8, seed=5)
    fit = fit_site(strong, standard_errors=False)
    t = context_test(strong, fit)
    assert t.df == 2 and t.p_value < 1e-6
    assert t.statistic == pytest.approx(2 * (fit.loglik - t.loglik_null), abs=1e-9)
    assert t.p_value_boundary <= t.p_value     # mixture puts weight on chi-square(0), (1)
    # no context in truth: the statistic is small
    none = simulate(SiteParams(2.0, 3.0, 0.0, 0.0, 0.6, 0.7), 150, 8, seed=6)
    fit0 = fit_site(none, standard_errors=False)
    assert context_test(none, fit0).p_value > 1e-3


def test_sequential_prediction_after_one_outcome_matches_core_update():
    # the core's moment-matched update keeps the exact posterior mean (DESIGN.md section 3),
    # so after one decline / no-response the exact quadrature predictive must equal it
    p = SiteParams(2.0, 3.0, 1.0, 0.5, 0.6)
    model_c = math.exp(-(1.0 * 0.4 + 0.5 * 0.2))
    for first in (DECLINED, NO_RESPONSE):
        data = from_arrays(["p", "p"], [0.4, 0.7], [0.2, 1.0], [first, HELPED])
        pred = SiteLikelihood(data).sequential_help_probability(p)
        prior = Belief(2.0, 3.0)
        after = update_declined(prior, model_c) if first == DECLINED else \
            update_no_response(prior, model_c, 0.6)
        c2 = math.exp(-(1.0 * 0.7 + 0.5 * 1.0))
        assert pred[0] == pytest.approx(math.exp(-(1.0 * 0.4 + 0.5 * 0.2)) * 0.4, rel=1e-12)
        assert pred[1] == pytest.approx(c2 * after.mean, rel=1e-10)


def test_half_life_fixed_on_request_with_ask_times():
    """fit_half_life=False on data with ask times keeps the half-life given, exactly.

    It raised a TypeError (the half-life passed twice to dataclasses.replace). Checks: the
    value is the one requested (exact); the fit with h free maximises over one more
    parameter, so its log-likelihood is at least the fixed fit's (up to the optimiser's
    tolerance).
    """
    truth = SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7, 3600.0)
    data = simulate_with_asks(truth, 150, 8, seed=5, unanswered=0.2).data
    fixed = fit_site(data, half_life_s=1800.0, fit_half_life=False, standard_errors=False)
    assert fixed.params.ask_memory_half_life_s == 1800.0
    assert "ask_memory_half_life_s" in fixed.fixed
    assert "ask_memory_half_life_s" not in fixed.free
    free = fit_site(data, half_life_s=1800.0, standard_errors=False)
    assert "ask_memory_half_life_s" in free.free
    assert free.loglik >= fixed.loglik - 1e-6
