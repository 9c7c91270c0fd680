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

"""Marginal likelihood of the site constants, each person's willingness integrated out.

Per person i with answered asks j (DESIGN.md section 3), given willingness w:
    helped       w c_j
    declined     1 - w c_j
    no response  1 - q w c_j          c_j = exp(-(k_busy x_j + k_load f_j)), q = notice prob.
The product over j is a polynomial in w of degree n_i (the person's number of outcomes), so
its expectation under Beta(a0, b0) is computed *exactly* by an n-node Gauss-Jacobi rule with
2n - 1 >= n_i (weight w^(a0-1) (1-w)^(b0-1) on [0, 1]).  People are grouped into buckets of
equal node count so that all work is vectorised over people and outcomes.

The w-free "reporting" factor.  Under the likelihood above q only enters through no-response
rows and lowers them, so its maximum is always q = 0.  The generative story behind it is:
the ask is noticed with probability nu; a noticed person helps with probability w c, otherwise
declines aloud with probability s or stays silent.  Then
    P(helped) = nu w c,  P(declined) = tau (1 - w c),  P(no response) = (1 - tau)(1 - q w c)
with tau = nu s and q = (nu - tau) / (1 - tau), i.e. nu = tau + q (1 - tau).  The w-free
factor  nu^H tau^D (1 - tau)^R  (H, D, R the counts) identifies q; tau is a nuisance constant.
It does not change any person's posterior, so the node's updates stay exactly as designed.
When there are no no-response rows the factor is maximised at tau = 1 (value 1) and is left
out, which makes the fit the plain Beta-binomial one when the context is absent.

The ask load.  With `ask_memory_half_life_s` set and the data carrying ask times
(`OutcomeData.prior_asks`), f_j is recomputed under that half-life from the asks before row j
(f_j = sum_k 2^(-age_jk / h), the core's ask_load), so h is a constant of the likelihood like
the others, with an analytic derivative; otherwise f_j is the data's `load` column.  The loads
of the last half-life asked for are kept (steps in the other constants reuse them).

Derivatives.  Analytic in every constant; in a0, b0 through the rule's nodes and weights,
which move with them (beta_rule_derivatives): the rule is exact for the polynomial at every
a0, b0, so the derivative of the rule's sum is the likelihood's own.

Weights.  A person may count w_i times (`OutcomeData.weight`): the pseudo-outcomes that
shrink an online refit towards the parameter file (fit/pseudo_outcomes.py) are people of
fractional weight; the data's own people count once.
"""
from __future__ import annotations

from dataclasses import dataclass
import functools
import math

import numpy as np
from scipy.linalg import eigh_tridiagonal

from .data import HELPED, NO_RESPONSE, OutcomeData


def logsumexp(x: np.ndarray, axis: int | None = None, keepdims: bool = False) -> np.ndarray:
    """log(sum(exp(x))) along `axis`, stable.

    Plain numpy (scipy's version costs ~1 ms a call in array-API bookkeeping, which dominated small
    fits).
    """
    m = np.max(x, axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    with np.errstate(divide="ignore"):
        out = m + np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True))
    return out if keepdims else (np.squeeze(out, axis=axis) if axis is not None else out.item())


# node counts actually used (a person needing n nodes uses the next one up), so few rules
# are computed per evaluation however many distinct history lengths there are
NODE_LADDER = (1, 2, 3, 4, 5, 6, 8, 10, 12, 16, 20, 24, 32, 40, 48, 64, 80, 96, 128, 160,
               192, 256, 320, 384, 512, 640, 768, 1024)


def nodes_needed(n_outcomes: np.ndarray, extra_degree: int = 0) -> np.ndarray:
    """Smallest n with 2n - 1 >= degree: exact for a polynomial of that degree."""
    degree = np.asarray(n_outcomes) + extra_degree
    return degree // 2 + 1


def _jacobi_entries(n: int, al: np.ndarray, be: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Diagonal and off-diagonal of the Jacobi matrix of the Beta(a0, b0) measure.

    Normalised (so no overflow of the 2^(alpha+beta+1) B(.,.) total mass that scipy's roots_jacobi
    forms); al = b0 - 1, be = a0 - 1 as columns (one row per point; complex: the complex step).
    """
    k = np.arange(n, dtype=float)
    s = 2.0 * k + al + be
    with np.errstate(divide="ignore", invalid="ignore"):
        diag = (be * be - al * al) / (s * (s + 2.0))
    diag[:, 0] = ((be - al) / (al + be + 2.0))[:, 0]
    m = np.arange(1, n, dtype=float)
    sm = 2.0 * m + al + be
    with np.errstate(divide="ignore", invalid="ignore"):
        off2 = 4.0 * m * (m + al) * (m + be) * (m + al + be) / (sm * sm * (sm + 1.0) * (sm - 1.0))
    if n > 1:    # first term with (1 + al + be) cancelled (finite when a0 + b0 = 1)
        off2[:, 0] = (4.0 * (1.0 + al) * (1.0 + be)
                      / ((2.0 + al + be) ** 2 * (3.0 + al + be)))[:, 0]
    return diag, np.sqrt(off2)


def _log_christoffel(t: np.ndarray, diag: np.ndarray, off: np.ndarray) -> np.ndarray:
    """Return the log Christoffel weights by the three-term recurrence.

    log of the Gauss weights 1 / sum_j p_j(t)^2 (p_j orthonormal for the measure, by the three-term
    recurrence; one row per point): relative accuracy even for tiny weights, which an eigenvector's
    first component squared lacks; analytic, so the complex step applies.
    """
    p_prev, p = np.zeros_like(t), np.ones_like(t)
    total = np.ones_like(t)
    for j in range(diag.shape[1] - 1):
        p_prev, p = p, ((t - diag[:, j:j + 1]) * p
                        - (off[:, j - 1:j] * p_prev if j else 0.0)) / off[:, j:j + 1]
        total = total + p * p
    return -np.log(total)


COMPLEX_STEP = 1e-30     # exact first derivatives (no subtraction), any step this small


@functools.lru_cache(maxsize=256)
def _jacobi_cached(n: int, a0: float, b0: float) -> tuple[np.ndarray, ...]:
    """Golub-Welsch nodes of the Beta(a0, b0) measure, Christoffel log weights.

    Their derivatives in a0 and b0: the nodes' by Hellmann-Feynman (dt_k = v_k' dJ v_k), the
    weights' by the complex step through the recurrence.  The rule is exact for the likelihood's
    polynomial at every (a0, b0), so these give its exact derivative there. Row 0 steps a0 (be),
    row 1 b0 (al); their real parts are the values themselves.
    """
    h = COMPLEX_STEP
    al = np.array([[b0 - 1.0 + 0j], [b0 - 1.0 + 1j * h]])   # Jacobi weight (1-t)^al (1+t)^be,
    be = np.array([[a0 - 1.0 + 1j * h], [a0 - 1.0 + 0j]])   # w = (1+t)/2
    diag_c, off_c = _jacobi_entries(n, al, be)
    diag, off = diag_c[0].real.copy(), off_c[0].real.copy()
    if n == 1:
        t, vecs = diag.copy(), np.ones((1, 1))
    else:
        t, vecs = eigh_tridiagonal(diag, off)
    dt = (diag_c.imag / h) @ (vecs * vecs)
    if n > 1:
        dt += 2.0 * (off_c.imag / h) @ (vecs[:-1] * vecs[1:])
    lw = _log_christoffel(t[None, :] + 1j * h * dt, diag_c, off_c)
    logw = lw[0].real.copy()
    shift = np.max(logw)                     # weights of a probability measure (rounding)
    logw -= shift + math.log(np.sum(np.exp(logw - shift)))
    g = np.exp(logw)
    dlogw = lw.imag / h
    dlogw -= (dlogw @ g)[:, None]            # keep the normalisation's derivative exact too
    x = np.clip(0.5 * (t + 1.0), 1e-300, 1.0 - 1e-16)
    dx = 0.5 * dt
    out = (x, logw, dx[0], dx[1], dlogw[0], dlogw[1])
    for arr in out:
        arr.setflags(write=False)
    return out


def beta_rule(n: int, a0: float, b0: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes on (0, 1) and log weights summing to 1 for E_{Beta(a0, b0)}[g(w)]."""
    rule = _jacobi_cached(int(n), float(a0), float(b0))
    return rule[0], rule[1]


def beta_rule_derivatives(n: int, a0: float, b0: float) -> tuple[np.ndarray, ...]:
    """(d x/d a0, d x/d b0, d log w/d a0, d log w/d b0) of beta_rule's nodes and weights."""
    return _jacobi_cached(int(n), float(a0), float(b0))[2:]


@dataclass(frozen=True)
class Bucket:
    nodes: int
    people: np.ndarray        # global person indices in this bucket
    rows: np.ndarray          # outcome rows of these people (contiguous per person)
    local_person: np.ndarray  # per row: index into `people`
    starts: np.ndarray        # per person: first position in `rows`
    # the likelihood's split (parameter-free, built once): a helped row's factor w c is a
    # power of w times a constant, so only the other rows need a value at every node
    n_helped: np.ndarray      # per person: helped rows (float)
    miss_rows: np.ndarray     # rows not helped, per person in order
    miss_local: np.ndarray    # per such row: index into `people`
    miss_people: np.ndarray | slice   # people with such rows (into `people`; all: a slice)
    miss_starts: np.ndarray   # per such person: first position in `miss_rows`


def make_buckets(data: OutcomeData, extra_degree: int = 0) -> list[Bucket]:
    counts = np.bincount(data.person, minlength=data.n_people)
    need = nodes_needed(counts, extra_degree)
    ladder = np.asarray(NODE_LADDER)
    if need.max(initial=1) > ladder[-1]:
        ladder = np.append(ladder, need.max())
    rung = ladder[np.searchsorted(ladder, need)]
    helped = data.result == HELPED
    buckets = []
    for n in np.unique(rung[counts > 0]):
        people = np.flatnonzero((rung == n) & (counts > 0))
        rows = np.flatnonzero(np.isin(data.person, people))
        local = np.searchsorted(people, data.person[rows])
        starts = np.searchsorted(local, np.arange(people.size))
        n_helped = np.bincount(local, helped[rows], minlength=people.size).astype(float)
        miss = rows[~helped[rows]]
        miss_local = local[~helped[rows]]
        missing, miss_starts = np.unique(miss_local, return_index=True)
        # everyone: a view, not a copy per evaluation
        miss_people: np.ndarray | slice = (slice(None) if missing.size == people.size
                                           else missing)
        buckets.append(Bucket(int(n), people, rows, local, starts, n_helped, miss,
                              miss_local, miss_people, miss_starts))
    return buckets


@dataclass(frozen=True)
class SiteParams:
    prior_a: float
    prior_b: float
    k_busy: float
    k_load: float
    notice_probability: float
    decline_aloud: float = 1.0     # tau: the w-free nuisance constant (see module doc)
    ask_memory_half_life_s: float | None = None   # None: the data's load column as given

    @property
    def noticed(self) -> float:
        """Return nu = tau + q (1 - tau), the chance an ask is seen (1 without no-responses)."""
        return self.decline_aloud + self.notice_probability * (1.0 - self.decline_aloud)

    def as_tuple(self) -> tuple[float | None, ...]:
        return (self.prior_a, self.prior_b, self.k_busy, self.k_load,
                self.notice_probability, self.decline_aloud, self.ask_memory_half_life_s)


class SiteLikelihood:
    """Log marginal likelihood of an OutcomeData table; vectorised over people and outcomes."""

    def __init__(self, data: OutcomeData, use_reporting_factor: bool | None = None):
        self.data = data
        self.buckets = make_buckets(data)
        self.weight = (np.ones(data.n_people) if data.weight is None
                       else np.asarray(data.weight, float))
        self.n_helped, self.n_declined, self.n_no_response = data.weighted_counts()
        self.use_reporting_factor = (self.n_no_response > 0 if use_reporting_factor is None
                                     else use_reporting_factor)
        self._loads_at: tuple | None = None      # (half-life, loads, d loads / d log h)
        self._helped = data.result == HELPED
        self._no_response = data.result == NO_RESPONSE
        self._row_weight = self.weight[data.person]
        self._slope_base = np.where(self._helped, -1.0, 0.0)    # d log(w c) / d u = -1
        self._no_response_f = self._no_response.astype(float)
        self._buffers: tuple | None = None
        self._helped_rows = np.flatnonzero(self._helped)
        self._helped_person = data.person[self._helped_rows]

    @property
    def has_ask_times(self) -> bool:
        return self.data.prior_asks is not None

    def loads(self, p: SiteParams) -> tuple[np.ndarray, np.ndarray | None]:
        """Ask load per row under p's half-life (and its derivative in log h).

        Or the data's column when p has no half-life or the data no ask times.
        """
        h = p.ask_memory_half_life_s
        if h is None or self.data.prior_asks is None:
            return self.data.load, None
        if self._loads_at is None or self._loads_at[0] != h:
            load, dload = self.data.prior_asks.loads(h, self.data.n_outcomes)
            self._loads_at = (h, load, dload)
        return self._loads_at[1], self._loads_at[2]

    # -- the likelihood and its gradient ------------------------------------------------
    def _work(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Three buffers of one value per not-helped row and node.

        Kept between evaluations (so an instance is not for concurrent use; each refit builds its
        own).
        """
        if self._buffers is None:
            size = max((b.miss_rows.size * b.nodes for b in self.buckets), default=0)
            self._buffers = tuple(np.empty(size) for _ in range(3))
        return self._buffers

    def _row_constants(self, p: SiteParams):
        """Return per row u = k_busy x + k_load f and the factor's removal chance per unit w.

        Per row: u = k_busy x + k_load f (c = exp(-u)) and the chance c q' a not-helped row's
        factor removes per unit of w (q' = q for no response, 1 for a decline).
        """
        load, dload = self.loads(p)
        u = p.k_busy * self.data.busyness + p.k_load * load
        cq = np.exp(-u)
        cq *= 1.0 + self._no_response_f * (p.notice_probability - 1.0)
        return u, cq, load, dload

    def _evaluate(self, p: SiteParams, want_grad: bool):
        """Return log L_i per person and, if asked, the weighted gradient.

        log L_i is unweighted and without the reporting factor; the gradient is in (a0, b0,
        k_busy, k_load, q, log h).

        Per person, log L_i = log sum_k w_k x_k^H_i prod_(j not helped) (1 - x_k c_j q'_j)
        - sum_(j helped) u_j.  Its derivative is the posterior mean over the nodes of the
        derivative of the log summand, the nodes and weights moving with a0, b0 (exactly:
        beta_rule_derivatives).  Per row only one value at each node is formed,
        r_jk = x_k c_j q'_j / (1 - x_k c_j q'_j); every derivative is a contraction of it.
        """
        d = self.data
        u, cq, load, dload = self._row_constants(p)
        ll = -np.bincount(self._helped_person, np.take(u, self._helped_rows),
                          minlength=d.n_people).astype(float)     # int when none helped
        slope = self._slope_base.copy() if want_grad else None   # d logf_j / d u_j
        g_ab = np.zeros(2)
        work = self._work()
        # np.take, einsum and ufuncs into kept buffers, not fancy indexing, matmul and fresh
        # arrays: several times faster on these tall, narrow arrays (no page faults of new
        # memory, no BLAS threads, which stall on a loaded machine)
        for b in self.buckets:
            x, logw, dxa, dxb, dlwa, dlwb = _jacobi_cached(b.nodes, float(p.prior_a),
                                                           float(p.prior_b))
            s = np.multiply.outer(b.n_helped, np.log(x))
            s += logw
            m = b.miss_rows.size
            if m:
                e, log_one_minus, post_rows = (w[:m * b.nodes].reshape(m, b.nodes)
                                               for w in work)
                np.multiply.outer(np.take(cq, b.miss_rows), x, out=e)
                np.subtract(1.0, e, out=log_one_minus)
                if want_grad:
                    np.divide(e, log_one_minus, out=e)          # r_jk = e / (1 - e)
                np.log(log_one_minus, out=log_one_minus)
                s[b.miss_people] += np.add.reduceat(log_one_minus, b.miss_starts, axis=0)
            lli = logsumexp(s, axis=1)
            ll[b.people] += lli
            if not want_grad:
                continue
            post = np.exp(s - lli[:, None])      # posterior weights of the nodes per person
            # d log summand_k / d a0 = d log w_k + (H_i - sum_j r_jk) dx_k / x_k (b0 alike)
            va, vb = dxa / x, dxb / x
            coef = b.n_helped[:, None] * post
            if m:
                ratio = e
                assert slope is not None   # made with want_grad
                np.take(post, b.miss_local, axis=0, out=post_rows, mode="clip")
                slope[b.miss_rows] = np.einsum("ij,ij->i", post_rows, ratio)
                coef[b.miss_people] -= post[b.miss_people] * np.add.reduceat(
                    ratio, b.miss_starts, axis=0)
            wp = np.take(self.weight, b.people)
            pw, cw = np.einsum("i,ij->j", wp, post), np.einsum("i,ij->j", wp, coef)
            g_ab += (pw @ dlwa + cw @ va, pw @ dlwb + cw @ vb)
        if not want_grad:
            return ll, None
        ws = slope * self._row_weight
        dot = lambda col: float(np.einsum("i,i->", ws, col))    # noqa: E731
        g = np.array([g_ab[0], g_ab[1], dot(d.busyness), dot(load),
                      -dot(self._no_response_f) / p.notice_probability,
                      p.k_load * dot(dload) if dload is not None else 0.0])
        return ll, g

    def value_and_grad(self, p: SiteParams) -> tuple[float, np.ndarray]:
        """Return the weighted log-likelihood and its derivatives.

        Weighted log-likelihood and its derivatives in (a0, b0, k_busy, k_load, q, tau, log h).
        """
        ll_i, g = self._evaluate(p, want_grad=True)
        rep, rep_q, rep_t = self.reporting_term(p)
        return (float(np.einsum("i,i->", self.weight, ll_i)) + rep,
                np.array([g[0], g[1], g[2], g[3], g[4] + rep_q, rep_t, g[5]]))

    def reporting_term(self, p: SiteParams) -> tuple[float, float, float]:
        """Return log of nu^H tau^D (1-tau)^R and its derivatives in q and tau (0 when unused)."""
        if not self.use_reporting_factor:
            return 0.0, 0.0, 0.0
        q, tau = p.notice_probability, p.decline_aloud
        nu = tau + q * (1.0 - tau)
        H, D, R = self.n_helped, self.n_declined, self.n_no_response
        with np.errstate(divide="ignore", invalid="ignore"):
            val = (H * np.log(nu) if H else 0.0) + (D * np.log(tau) if D else 0.0) \
                + (R * np.log1p(-tau) if R else 0.0)
            d_q = H * (1.0 - tau) / nu if H else 0.0
            d_tau = (H * (1.0 - q) / nu if H else 0.0) + (D / tau if D else 0.0) \
                - (R / (1.0 - tau) if R else 0.0)
        return float(val), float(d_q), float(d_tau)

    def loglik(self, p: SiteParams) -> float:
        ll, _ = self._evaluate(p, want_grad=False)
        return float(np.einsum("i,i->", self.weight, ll)) + self.reporting_term(p)[0]

    def per_person(self, p: SiteParams) -> np.ndarray:
        """Return log L_i per person (unweighted, without the reporting factor)."""
        return self._evaluate(p, want_grad=False)[0]

    # -- held-out prediction -----------------------------------------------------------
    def sequential_help_probability(self, p: SiteParams) -> np.ndarray:
        """P(help) of each row given only that person's earlier rows (exact posterior)."""
        out = np.zeros(self.data.n_outcomes)
        u, cq, _, _ = self._row_constants(p)
        for b in make_buckets(self.data, extra_degree=1):
            x, logw = beta_rule(b.nodes, p.prior_a, p.prior_b)
            with np.errstate(divide="ignore"):
                logf = np.where(self._helped[b.rows, None], np.log(x)[None, :]
                                - u[b.rows, None], np.log1p(-cq[b.rows, None] * x[None, :]))
            cum = np.cumsum(logf, axis=0)
            before_start = (cum[b.starts] - logf[b.starts])[b.local_person]
            excl = cum - logf - before_start + logw[None, :]
            post = np.exp(excl - logsumexp(excl, axis=1, keepdims=True))
            out[b.rows] = np.exp(-u[b.rows]) * (post @ x)
        return np.clip(out, 0.0, 1.0)

    def new_person_help_probability(self, p: SiteParams) -> np.ndarray:
        d = self.data
        c = np.exp(-(p.k_busy * d.busyness + p.k_load * self.loads(p)[0]))
        return c * p.prior_a / (p.prior_a + p.prior_b)
