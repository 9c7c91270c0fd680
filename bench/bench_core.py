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

"""Time to decide among N candidates, beside one bare vectorised numpy pass (the floor).

Prints, for N in 1, 10, 100, 1000: median decide() time, median floor time, and their ratio.
Target: 100 candidates in under 1 ms.
"""
from __future__ import annotations

import platform
import statistics
import sys
import time

from helpaware_node.core import Belief, Candidate, decide, DecisionConfig, HelpNeed, SiteModel
import numpy as np


def make_candidates(n: int, rng: np.random.Generator, now: float) -> list[Candidate]:
    return [Candidate(person_id=f"p{i}", distance_m=float(rng.uniform(0, 8)), observed_at_s=now,
                      belief=Belief(float(rng.uniform(0.5, 20)), float(rng.uniform(0.5, 20))),
                      busyness=float(rng.uniform(0, 0.8)),
                      ask_times_s=tuple(now - rng.uniform(1000, 80000, size=rng.integers(0, 3))),
                      candidate_count=int(rng.integers(0, 50)), first_seen_s=now - 86400.0)
            for i in range(n)]


def floor_pass(a, b, x, f, model, config, cost):
    """Return the same arithmetic as the decision, with nothing around it."""
    m = a / (a + b)
    c = np.exp(-(model.k_busy * x + model.k_load * f))
    p = c * m
    i = config.interruption_weight_s * (1 + config.busy_cost * x + config.repeat_cost * f)
    adv = p * (cost - config.help_time_s) - (1 - p) * config.ask_time_s - i
    m2 = m * (a + 1) / (a + b + 1)
    md = (m - c * m2) / (1 - c * m)
    g = 0.5 * (cost - config.help_time_s + config.ask_time_s)
    u = lambda v: np.maximum(0.0, g * v - 20.0)  # noqa: E731
    voi = p * u((a + 1) / (a + b + 1)) + (1 - p) * u(md) - u(m)
    return int(np.argmax(adv + voi))


def median_time(fn, repeats: int) -> float:
    samples = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        samples.append(time.perf_counter() - t0)
    return statistics.median(samples)


def main() -> int:
    model, config = SiteModel(), DecisionConfig()
    rng = np.random.default_rng(1)
    now = 100000.0
    need = HelpNeed("bench", "door", now)
    print(f"bench_core  python {sys.version.split()[0]}  {platform.machine()}  "
          f"numpy {np.__version__}")
    print(f"{'candidates':>10}  {'decide ms':>10}  {'floor ms':>9}  {'ratio':>6}")
    ok = True
    for n in (1, 10, 100, 1000):
        cands = make_candidates(n, rng, now)
        a = np.array([c.belief.a for c in cands])
        b = np.array([c.belief.b for c in cands])
        x = np.array([c.busyness for c in cands])
        f = np.array([sum(2 ** (-(now - t) / 1800.0) for t in c.ask_times_s) for c in cands])
        repeats = 2000 if n <= 100 else 300
        t_dec = median_time(lambda: decide(need, cands, now, [], model, config), repeats)
        t_floor = median_time(lambda: floor_pass(a, b, x, f, model, config, 90.0), repeats)
        print(f"{n:>10}  {t_dec * 1e3:>10.3f}  {t_floor * 1e3:>9.3f}  {t_dec / t_floor:>6.1f}")
        if n == 100:
            ok = t_dec < 1e-3
    print(f"target: 100 candidates under 1 ms: {'met' if ok else 'MISSED'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
