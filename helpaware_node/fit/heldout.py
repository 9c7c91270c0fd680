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

"""Held-out log loss and calibration by k-fold over people.

Each fold's people are left out, both models are fitted on the rest, and every held-out row
is predicted from the fitted constants plus only that person's *earlier* rows ("sequential",
the node's own use) and, for reference, from the constants alone ("new person").  The site
model's own P(help) is nu c E[w | earlier rows] (nu: chance the ask is noticed, see
site_likelihood); the node predicts c E[w | earlier rows], which is also reported.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import math

import numpy as np

from .data import HELPED, OutcomeData
from .glmm import new_group_help_probability, RandomInterceptLogit, sequential_help_probability
from .site_fit import fit_site
from .site_likelihood import SiteLikelihood

EPS = 1e-12


def log_loss(p: np.ndarray, y: np.ndarray) -> float:
    p = np.clip(p, EPS, 1 - EPS)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log1p(-p)))


def brier(p: np.ndarray, y: np.ndarray) -> float:
    return float(np.mean((p - y) ** 2))


def calibration_table(p: np.ndarray, y: np.ndarray, bins: int = 10) -> list[tuple]:
    """(low, high, rows, mean predicted, observed rate) per probability bin."""
    edges = np.linspace(0.0, 1.0, bins + 1)
    which = np.clip(np.digitize(p, edges) - 1, 0, bins - 1)
    out = []
    for b in range(bins):
        m = which == b
        if np.any(m):
            out.append((edges[b], edges[b + 1], int(m.sum()), float(p[m].mean()),
                        float(y[m].mean())))
    return out


def glmm_design(data: OutcomeData) -> np.ndarray:
    return np.column_stack([np.ones(data.n_outcomes), data.busyness, data.load])


@dataclass
class HeldOut:
    folds: int
    rows: int
    site_sequential: float
    site_new_person: float
    glmm_sequential: float
    glmm_new_person: float
    site_node_sequential: float    # as the node predicts (no notice factor)
    site_brier: float
    glmm_brier: float
    calibration: list = field(default_factory=list)
    base_rate: float = math.nan
    unconverged: list = field(default_factory=list)   # "fold k model: reason" per failed fit


def kfold(data: OutcomeData, folds: int = 5, seed: int = 0, notice_probability: float = 0.8,
          glmm_nodes: int = 15, progress=None) -> HeldOut:
    if data.n_people < folds:
        raise ValueError(f"k-fold over people: {data.n_people} people for {folds} folds; "
                         "use fewer folds")
    rng = np.random.default_rng(seed)
    fold_of = rng.permutation(data.n_people) % folds
    y = (data.result == HELPED).astype(float)
    preds = {k: np.zeros(data.n_outcomes) for k in ("ss", "sn", "ns", "gs", "gn")}
    unconverged = []
    for k in range(folds):
        if progress is not None:
            progress.step(f"fold {k + 1} of {folds}")
        train = data.subset_people(np.flatnonzero(fold_of != k))
        test_people = np.flatnonzero(fold_of == k)
        test = data.subset_people(test_people)
        rows = np.flatnonzero(np.isin(data.person, test_people))   # same order as `test`
        site = fit_site(train, notice_probability=notice_probability, standard_errors=False)
        if not site.converged:
            unconverged.append(f"fold {k + 1} site model: {site.reason}")
        lik = SiteLikelihood(test)
        node_seq = lik.sequential_help_probability(site.params)
        preds["ns"][rows] = node_seq
        preds["ss"][rows] = site.params.noticed * node_seq
        preds["sn"][rows] = site.params.noticed * lik.new_person_help_probability(site.params)
        ytr = (train.result == HELPED).astype(float)
        g = RandomInterceptLogit(ytr, np.ones_like(ytr), glmm_design(train), train.person,
                                 nodes=glmm_nodes).fit(standard_errors=False)
        if not g.converged:
            unconverged.append(f"fold {k + 1} GLMM: {g.verdict.reason}")
        yte = (test.result == HELPED).astype(float)
        preds["gs"][rows] = sequential_help_probability(g.beta, g.sigma, glmm_design(test),
                                                        test.person, yte)
        preds["gn"][rows] = new_group_help_probability(g.beta, g.sigma, glmm_design(test))
    return HeldOut(folds, data.n_outcomes, log_loss(preds["ss"], y), log_loss(preds["sn"], y),
                   log_loss(preds["gs"], y), log_loss(preds["gn"], y),
                   log_loss(preds["ns"], y),
                   brier(preds["ss"], y), brier(preds["gs"], y),
                   calibration_table(preds["ss"], y), float(y.mean()), unconverged)
