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

"""Context of an ask: busyness and recent asks lower the chance of help (DESIGN.md section 3).

ask load  f(t) = sum_k 2^(-(t - t_k)/h)   over past asks t_k <= t of that person
factor    c = exp(-(k_busy * x + k_load * f))
"""
from __future__ import annotations

import math
from typing import Iterable, overload, Union

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .model import CoreInputError
from .preview import short_number


def ask_load(ask_times_s: Iterable[float], now_s: float, half_life_s: float) -> float:
    """Decayed count of past asks; asks stamped after `now_s` (clock jumps) count as just made."""
    if half_life_s <= 0.0:
        raise CoreInputError("ask_memory_half_life_s: must be > 0")
    times = np.fromiter(ask_times_s, dtype=float)
    if times.size == 0:
        return 0.0
    ages = np.maximum(now_s - times, 0.0)
    return float(np.sum(np.exp2(-ages / half_life_s)))


@overload
def context_factor(busyness: float, load: float, k_busy: float, k_load: float) -> float: ...


@overload
def context_factor(busyness: NDArray[np.float64], load: ArrayLike, k_busy: ArrayLike,
                   k_load: ArrayLike) -> NDArray[np.float64]: ...


def context_factor(busyness: ArrayLike, load: ArrayLike, k_busy: ArrayLike,
                   k_load: ArrayLike) -> Union[float, NDArray[np.float64]]:
    """Return c = exp(-(k_busy x + k_load f)); scalars or arrays; busyness in [0, 1], load >= 0."""
    if (type(busyness) is float and type(load) is float and type(k_busy) is float
            and type(k_load) is float):
        # one outcome under one model (the store's fold): the same checks, messages and
        # arithmetic without building arrays (constants as arrays: a fit's grid, below)
        if not 0.0 <= busyness <= 1.0:
            raise CoreInputError(f"busyness: {short_number(busyness)} must lie in [0, 1]")
        if not 0.0 <= load < math.inf:
            raise CoreInputError(f"ask load: {short_number(load)} must be finite and >= 0")
        return float(np.exp(-(k_busy * busyness + k_load * load)))
    x = np.asarray(busyness, dtype=float)
    f = np.asarray(load, dtype=float)
    bad_x = ~np.isfinite(x) | (x < 0.0) | (x > 1.0)
    if np.any(bad_x):   # name the first bad value, not the whole array
        raise CoreInputError(f"busyness: {_first(x, bad_x)} must lie in [0, 1]")
    bad_f = ~np.isfinite(f) | (f < 0.0)
    if np.any(bad_f):
        raise CoreInputError(f"ask load: {_first(f, bad_f)} must be finite and >= 0")
    kb = np.asarray(k_busy, dtype=float)
    kl = np.asarray(k_load, dtype=float)
    c = np.exp(-(kb * x + kl * f))
    return float(c) if c.ndim == 0 else c


def _first(values: NDArray[np.float64], bad: NDArray[np.bool_]) -> str:
    shown = short_number(float(values[bad].flat[0]))
    return shown if values.ndim == 0 else f"{shown} (one of {values.size} values)"
