"""Context of an ask: busyness and recent asks lower the chance of help (DESIGN.md section 3).

ask load  f(t) = sum_k 2^(-(t - t_k)/h)   over past asks t_k <= t of that person
factor    c = exp(-(k_busy * x + k_load * f))
"""
from __future__ import annotations

from typing import Iterable

import numpy as np

from .model import CoreInputError


def ask_load(ask_times_s: Iterable[float], now_s: float, half_life_s: float) -> float:
    """Decayed count of past asks; asks stamped after `now_s` (clock jumps) count as just made."""
    if half_life_s <= 0.0:
        raise CoreInputError("ask_memory_half_life_s: must be > 0")
    times = np.fromiter(ask_times_s, dtype=float)
    if times.size == 0:
        return 0.0
    ages = np.maximum(now_s - times, 0.0)
    return float(np.sum(np.exp2(-ages / half_life_s)))


def context_factor(busyness, load, k_busy: float, k_load: float):
    """c = exp(-(k_busy x + k_load f)); scalars or arrays; busyness in [0, 1], load >= 0."""
    x = np.asarray(busyness, dtype=float)
    f = np.asarray(load, dtype=float)
    if np.any(~np.isfinite(x)) or np.any((x < 0.0) | (x > 1.0)):
        raise CoreInputError(f"busyness: {x!r} must lie in [0, 1]")
    if np.any(~np.isfinite(f)) or np.any(f < 0.0):
        raise CoreInputError(f"ask load: {f!r} must be finite and >= 0")
    c = np.exp(-(k_busy * x + k_load * f))
    return float(c) if c.ndim == 0 else c
