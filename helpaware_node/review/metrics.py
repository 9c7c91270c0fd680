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

"""Scores of predicted help probability against what happened, and Beta intervals.

Brier score  = mean (p - y)^2
log loss     = -mean [y ln p + (1 - y) ln(1 - p)], p clipped to [eps, 1 - eps]
reliability  = per probability bin: mean predicted p, observed help rate, count
"""
from __future__ import annotations

import math
from typing import Sequence

import numpy as np
from scipy.special import betaincinv  # lighter to import than scipy.stats

LOG_LOSS_EPS = 1e-15


def brier_score(p: Sequence[float], y: Sequence[int]) -> float:
    pa = np.asarray(p, dtype=float)
    ya = np.asarray(y, dtype=float)
    if pa.size == 0:
        return math.nan
    return float(np.mean((pa - ya) ** 2))


def log_loss(p: Sequence[float], y: Sequence[int], eps: float = LOG_LOSS_EPS) -> float:
    pa = np.clip(np.asarray(p, dtype=float), eps, 1.0 - eps)
    ya = np.asarray(y, dtype=float)
    if pa.size == 0:
        return math.nan
    return float(-np.mean(ya * np.log(pa) + (1.0 - ya) * np.log1p(-pa)))


def reliability_bins(p: Sequence[float], y: Sequence[int], n_bins: int = 10) -> list[dict]:
    """Equal-width bins on [0, 1]; p = 1 falls in the last bin. Empty bins are left out."""
    pa = np.asarray(p, dtype=float)
    ya = np.asarray(y, dtype=float)
    idx = np.minimum((pa * n_bins).astype(int), n_bins - 1)
    rows = []
    for k in range(n_bins):
        sel = idx == k
        n = int(sel.sum())
        if n:
            rows.append({"bin_low": k / n_bins, "bin_high": (k + 1) / n_bins, "count": n,
                         "mean_predicted": float(pa[sel].mean()),
                         "observed_rate": float(ya[sel].mean())})
    return rows


def beta_interval(a, b, level: float = 0.9):
    """Central `level` interval of Beta(a, b) (vectorised)."""
    tail = (1.0 - level) / 2.0
    return betaincinv(a, b, tail), betaincinv(a, b, 1.0 - tail)
