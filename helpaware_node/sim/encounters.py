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

"""The re-encounter check: the robot's N against how often people really come back.

At every encounter of a person (a need where they are in view, so a candidate), the robot's
N is core.policy.future_requests of their record then: the needs before where they were a
candidate and when it first saw them. What N estimates is the discounted number of later
needs within the look-ahead horizon where they are a candidate again; the world knows it:
sum over their actual later encounters of e^(-dt/tau), dt <= H. Both are averaged per group
(regulars, strangers) and per encounter number, over every encounter of every seed whose
horizon ends within the run (later ones would count encounters the run never made).

Beside it, the site's own prior for a never-seen person: each first-met person's later
encounters per day over the rest of the run (at least an hour of it), and the Gamma that
matches their mean and variance (shape = mean^2 / var, window = mean / var): what
prior_candidate_rate_per_day (the mean) and prior_rate_window_s (the window) would be if the
robot knew the site.
"""
from __future__ import annotations

import dataclasses
import math
from typing import Sequence

import numpy as np

from .scenario import Scenario
from .world import build_world, World
from ..core.model import DecisionConfig
from ..core.person import DAY_S
from ..core.policy import future_requests
from ..text_table import render_table

BUCKETS = (("1st", 0, 1), ("2nd-5th", 1, 5), ("6th-20th", 5, 20), ("21st+", 20, math.inf))


def encounter_rows(world: World, config: DecisionConfig) -> list[tuple[str, int, float, float]]:
    """(group, encounter index from 0, robot's N, realised discounted later encounters)."""
    tau, horizon = config.future_discount_time_s, config.lookahead_horizon_s
    times = np.array([n.time_s for n in world.needs])
    rows = []
    end = world.duration_s
    for pid, idx in world.encounters.items():
        group = "stranger" if pid.rsplit("-", 1)[-1].startswith("s") else "regular"
        t = times[np.asarray(idx, dtype=int)]
        first = float(t[0])
        for k in range(t.size):
            if t[k] + horizon > end:
                break
            robot_n = float(future_requests(k, first, float(t[k]), config))
            dt = t[k + 1:] - t[k]
            real = float(np.sum(np.exp(-dt[dt <= horizon] / tau)))
            rows.append((group, k, robot_n, real))
    return rows


def site_rate_prior(worlds: Sequence[World]) -> dict:
    """Return the Gamma moment-matched to first-met people's later encounter rates (module doc)."""
    rates = []
    for w in worlds:
        times = np.array([n.time_s for n in w.needs])
        for idx in w.encounters.values():
            t = times[np.asarray(idx, dtype=int)]
            rates.append((t.size - 1) / max(w.duration_s - t[0], 3600.0) * DAY_S)
    r = np.asarray(rates)
    mean, var = float(r.mean()), float(r.var())
    return {"people": r.size / max(len(worlds), 1), "seen_again": float(np.mean(r > 0)),
            "mean_per_day": mean, "shape": mean * mean / var if var > 0 else math.inf,
            "window_s": mean / var * DAY_S if var > 0 else math.inf}


def check(sc: Scenario, config: DecisionConfig, seeds: int = 3) -> dict:
    """Mean robot N and mean real later encounters per (group, bucket), and per group."""
    worlds = [build_world(sc, s) for s in range(seeds)]
    rows = [r for w in worlds for r in encounter_rows(w, config)]
    out: dict = {"prior": site_rate_prior(worlds)}
    for group in ("regular", "stranger"):
        mine = [r for r in rows if r[0] == group]
        if not mine:
            continue
        out[(group, "all")] = _cell(mine)
        for name, lo, hi in BUCKETS:
            cell = [r for r in mine if lo <= r[1] < hi]
            if cell:
                out[(group, name)] = _cell(cell)
    return out


def _cell(rows) -> dict:
    robot = np.array([r[2] for r in rows])
    real = np.array([r[3] for r in rows])
    return {"encounters": len(rows), "robot_n": float(robot.mean()), "real_n": float(real.mean()),
            "ratio": float(robot.mean() / real.mean()) if real.mean() > 0 else math.inf}


def check_table(result: dict) -> str:
    rows = []
    for key, c in result.items():
        if key == "prior":
            continue
        group, bucket = key
        ratio = "inf" if math.isinf(c["ratio"]) else f"{c['ratio']:.2f}"
        rows.append([group, bucket, str(c["encounters"]), f"{c['robot_n']:.3f}",
                     f"{c['real_n']:.3f}", ratio])
    return render_table(["people", "encounter", "encounters", "robot's N", "real later",
                         "N / real"], rows, [False, False, True, True, True, True])


def report(scenarios: Sequence[Scenario], config: DecisionConfig, seeds: int = 3) -> str:
    h_h = config.lookahead_horizon_s / 3600.0
    t_h = config.future_discount_time_s / 3600.0
    lines = [f"re-encounter check: look-ahead horizon {h_h:g} h, discount time {t_h:g} h, "
             f"prior {config.prior_candidate_rate_per_day:g} per day over "
             f"{config.prior_rate_window_s / 3600.0:g} h; {seeds} seeds per site; 'real later' = "
             f"discounted count of the person's actual later encounters within the horizon"]
    for sc in scenarios:
        result = check(sc, config, seeds)
        p = result["prior"]
        lines += ["", f"site {sc.name}: {p['people']:.0f} people met per run, "
                  f"{100 * p['seen_again']:.1f} % of them seen again; their later encounters "
                  f"{p['mean_per_day']:.3f} per day on average, a Gamma of shape "
                  f"{p['shape']:.3g} over a window of {p['window_s'] / 3600.0:.3g} h "
                  f"(the robot's prior: shape "
                  f"{config.prior_candidate_rate_per_day * config.prior_rate_window_s / DAY_S:.3g}"
                  f" over {config.prior_rate_window_s / 3600.0:.3g} h)",
                  check_table(result)]
    return "\n".join(lines)


def main(argv=None) -> int:
    """Run `python -m helpaware_node.sim.encounters SCENARIO.yaml ... [--seeds N]`."""
    import argparse

    from .scenario import load
    ap = argparse.ArgumentParser(description="the re-encounter check on scenario files, "
                                 "with the shipped DecisionConfig")
    ap.add_argument("scenarios", nargs="+")
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--prior-rate-per-day", type=float, default=None,
                    help="prior_candidate_rate_per_day to check instead of the shipped one")
    ap.add_argument("--prior-window-s", type=float, default=None,
                    help="prior_rate_window_s to check instead of the shipped one")
    args = ap.parse_args(argv)
    config = DecisionConfig()
    if args.prior_rate_per_day is not None:
        config = dataclasses.replace(config, prior_candidate_rate_per_day=args.prior_rate_per_day)
    if args.prior_window_s is not None:
        config = dataclasses.replace(config, prior_rate_window_s=args.prior_window_s)
    print(report([load(p) for p in args.scenarios], config, seeds=max(args.seeds, 1)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
