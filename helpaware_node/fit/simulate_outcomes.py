"""Outcome tables drawn from the fitted model itself (for tests and the benchmark).

Generative story (see site_likelihood): noticed with probability nu = tau + q (1 - tau); a
noticed person helps with probability w c, otherwise declines aloud with probability
s = tau / nu, else stays silent; an unnoticed ask gets no response.
"""
from __future__ import annotations

import numpy as np

from .data import DECLINED, HELPED, NO_RESPONSE, OutcomeData, from_arrays
from .site_likelihood import SiteParams


def simulate(params: SiteParams, n_people: int, asks_per_person: float, seed: int,
             load_scale: float = 1.0) -> OutcomeData:
    rng = np.random.default_rng(seed)
    counts = 1 + rng.poisson(max(asks_per_person - 1.0, 0.0), size=n_people)
    w = rng.beta(params.prior_a, params.prior_b, size=n_people)
    person = np.repeat(np.arange(n_people), counts)
    n = person.size
    x = rng.beta(1.2, 2.0, size=n)
    f = load_scale * rng.exponential(0.6, size=n) * (rng.random(n) < 0.5)
    c = np.exp(-(params.k_busy * x + params.k_load * f))
    tau, q = params.decline_aloud, params.notice_probability
    nu = tau + q * (1.0 - tau)
    noticed = rng.random(n) < nu
    helps = noticed & (rng.random(n) < w[person] * c)
    aloud = noticed & ~helps & (rng.random(n) < tau / nu)
    result = np.where(helps, HELPED, np.where(aloud, DECLINED, NO_RESPONSE))
    keys = [f"p{i:06d}" for i in range(n_people)]
    return from_arrays([keys[i] for i in person], x, f, result, keys)
