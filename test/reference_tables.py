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

"""The published tables in test/data/ as arrays.

Checked against the counts in their README (one reader for the fit tests).
"""
from __future__ import annotations

import os

import numpy as np

DATA = os.path.join(os.path.dirname(__file__), "data")


def rat_tumour_groups() -> tuple[np.ndarray, np.ndarray]:
    """(y, n) of the 71 rat tumour groups (BDA3 Table 5.1); the last is the current one."""
    rows = [line.strip().split(",") for line in open(os.path.join(DATA, "rat_tumor.csv"))
            if line[:1].isdigit()]
    y = np.array([int(r[0]) for r in rows])
    n = np.array([int(r[1]) for r in rows])
    assert y.size == 71 and y.sum() == 267 and n.sum() == 1739   # counts in the README
    return y, n


def cbpp_design() -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(incidence, size, X, herd) of lme4's cbpp, X = intercept and period 2-4 indicators."""
    rows = np.array([line.strip().split(",") for line in open(os.path.join(DATA, "cbpp.csv"))
                     if line[:1].isdigit()], dtype=float)
    herd, inc, size, period = rows.T
    assert rows.shape[0] == 56 and inc.sum() == 99 and size.sum() == 842   # README counts
    X = np.column_stack([np.ones(len(rows))] + [(period == k).astype(float) for k in (2, 3, 4)])
    return inc, size, X, herd
