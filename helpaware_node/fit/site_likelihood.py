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
of the last half-life asked for are kept, so the prior's finite differences (which move only
a0, b0) reuse them.

Weights.  A person may count w_i times (`OutcomeData.weight`): the pseudo-outcomes that
shrink an online refit towards the parameter file (fit/pseudo_outcomes.py) are people of
fractional weight; the data's own people count once.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass

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


@functools.lru_cache(maxsize=256)
def _jacobi_cached(n: int, a0: float, b0: float) -> tuple[np.ndarray, np.ndarray]:
    """Return the Gauss-Jacobi nodes and weights by Golub-Welsch.

    Golub-Welsch on the Jacobi matrix of the Beta(a0, b0) measure (normalised, so no overflow of
    the 2^(alpha+beta+1) B(.,.) total mass that scipy's roots_jacobi forms).
    """
    al, be = b0 - 1.0, a0 - 1.0             # Jacobi weight (1-t)^al (1+t)^be, w = (1+t)/2
    k = np.arange(n, dtype=float)
    s = 2.0 * k + al + be
    with np.errstate(divide="ignore", invalid="ignore"):
        diag = (be * be - al * al) / (s * (s + 2.0))
    diag[0] = (be - al) / (al + be + 2.0)
    m = np.arange(1, n, dtype=float)
    sm = 2.0 * m + al + be
    with np.errstate(divide="ignore", invalid="ignore"):
        off2 = 4.0 * m * (m + al) * (m + be) * (m + al + be) / (sm * sm * (sm + 1.0) * (sm - 1.0))
    if n > 1:    # first term with (1 + al + be) cancelled (finite when a0 + b0 = 1)
        off2[0] = 4.0 * (1.0 + al) * (1.0 + be) / ((2.0 + al + be) ** 2 * (3.0 + al + be))
    if n == 1:
        t, vec0 = diag.copy(), np.ones(1)
    else:
        t, vecs = eigh_tridiagonal(diag, np.sqrt(off2))
        vec0 = vecs[0]
    x = np.clip(0.5 * (t + 1.0), 1e-300, 1.0 - 1e-16)
    with np.errstate(divide="ignore"):
        logw = np.log(vec0 * vec0)
    logw -= logsumexp(logw)                 # weights of a probability measure
    return x, logw


def beta_rule(n: int, a0: float, b0: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes on (0, 1) and log weights summing to 1 for E_{Beta(a0, b0)}[g(w)]."""
    return _jacobi_cached(int(n), float(a0), float(b0))


@dataclass(frozen=True)
class Bucket:
    nodes: int
    people: np.ndarray        # global person indices in this bucket
    rows: np.ndarray          # outcome rows of these people (contiguous per person)
    local_person: np.ndarray  # per row: index into `people`
    starts: np.ndarray        # per person: first position in `rows`


def make_buckets(data: OutcomeData, extra_degree: int = 0) -> list[Bucket]:
    counts = np.bincount(data.person, minlength=data.n_people)
    need = nodes_needed(counts, extra_degree)
    ladder = np.asarray(NODE_LADDER)
    if need.max(initial=1) > ladder[-1]:
        ladder = np.append(ladder, need.max())
    rung = ladder[np.searchsorted(ladder, need)]
    buckets = []
    for n in np.unique(rung[counts > 0]):
        people = np.flatnonzero((rung == n) & (counts > 0))
        rows = np.flatnonzero(np.isin(data.person, people))
        local = np.searchsorted(people, data.person[rows])
        starts = np.searchsorted(local, np.arange(people.size))
        buckets.append(Bucket(int(n), people, rows, local, starts))
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

    # -- per-row log factors at the nodes ------------------------------------------------
    def _row_terms(self, b: Bucket, x: np.ndarray, p: SiteParams, want_grad: bool):
        d = self.data
        load, dload = self.loads(p)
        xb, fb, rb = d.busyness[b.rows], load[b.rows], d.result[b.rows]
        logc = -(p.k_busy * xb + p.k_load * fb)[:, None]
        c = np.exp(logc)
        helped = (rb == HELPED)[:, None]
        q_row = np.where(rb == NO_RESPONSE, p.notice_probability, 1.0)[:, None]
        e = x[None, :] * c * q_row                       # chance the factor removes
        with np.errstate(divide="ignore"):
            log_fail = np.log1p(-e)
        logf = np.where(helped, np.log(x)[None, :] + logc, log_fail)
        if not want_grad:
            return logf, None
        ratio = np.where(helped, 0.0, e / (1.0 - e))     # d/d(-log c) of log(1 - e)
        # d logf / d(-log c) is -1 (helped) or ratio (not helped); -log c = k_busy x + k_load f
        slope = np.where(helped, -1.0, ratio)
        dk_busy = slope * xb[:, None]
        dk_load = slope * fb[:, None]
        nr = (rb == NO_RESPONSE)[:, None]
        dq = np.where(nr, -(x[None, :] * c) / (1.0 - e), 0.0)
        # half-life: f_j moves with log h, so d logf / d log h = slope k_load df_j/dlog h
        dlog_h = (slope * (p.k_load * dload[b.rows])[:, None] if dload is not None
                  else np.zeros_like(dk_busy))
        return logf, (dk_busy, dk_load, dq, dlog_h)

    def per_person(self, p: SiteParams, want_grad: bool = False):
        """Return log L_i per person (unweighted, without the reporting factor) and, if asked.

        d/d(k_busy, k_load, q, log h) per person at fixed nodes (the nodes depend on a0, b0 only).
        """
        ll = np.zeros(self.data.n_people)
        grad = np.zeros((self.data.n_people, 4)) if want_grad else None
        for b in self.buckets:
            x, logw = beta_rule(b.nodes, p.prior_a, p.prior_b)
            logf, parts = self._row_terms(b, x, p, want_grad)
            s = np.add.reduceat(logf, b.starts, axis=0) + logw[None, :]
            lli = logsumexp(s, axis=1)
            ll[b.people] = lli
            if grad is not None:
                post = np.exp(s - lli[:, None])          # posterior weights per person
                rowpost = post[b.local_person]
                for k, part in enumerate(parts):
                    grad[b.people, k] = np.bincount(b.local_person,
                                                    np.sum(rowpost * part, axis=1),
                                                    minlength=b.people.size)
        return ll, grad

    def value_and_grad(self, p: SiteParams) -> tuple[float, np.ndarray]:
        """Weighted log-likelihood and its derivatives in (k_busy, k_load, q, tau, log h)."""
        ll_i, g_i = self.per_person(p, want_grad=True)
        rep, rep_q, rep_t = self.reporting_term(p)
        wg = self.weight @ g_i
        g = np.array([wg[0], wg[1], wg[2] + rep_q, rep_t, wg[3]])
        return float(self.weight @ ll_i) + rep, g

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
        ll, _ = self.per_person(p)
        return float(self.weight @ ll) + self.reporting_term(p)[0]

    # -- held-out prediction -----------------------------------------------------------
    def sequential_help_probability(self, p: SiteParams) -> np.ndarray:
        """P(help) of each row given only that person's earlier rows (exact posterior)."""
        out = np.zeros(self.data.n_outcomes)
        for b in make_buckets(self.data, extra_degree=1):
            x, logw = beta_rule(b.nodes, p.prior_a, p.prior_b)
            logf, _ = self._row_terms(b, x, p, False)
            cum = np.cumsum(logf, axis=0)
            before_start = (cum[b.starts] - logf[b.starts])[b.local_person]
            excl = cum - logf - before_start + logw[None, :]
            post = np.exp(excl - logsumexp(excl, axis=1, keepdims=True))
            d = self.data
            load = self.loads(p)[0]
            c = np.exp(-(p.k_busy * d.busyness[b.rows] + p.k_load * load[b.rows]))
            out[b.rows] = c * (post @ x)
        return np.clip(out, 0.0, 1.0)

    def new_person_help_probability(self, p: SiteParams) -> np.ndarray:
        d = self.data
        c = np.exp(-(p.k_busy * d.busyness + p.k_load * self.loads(p)[0]))
        return c * p.prior_a / (p.prior_a + p.prior_b)
