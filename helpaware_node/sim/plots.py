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

"""PNG plots of a comparison (matplotlib Agg): cumulative reward over time; asks per person."""
from __future__ import annotations

import os

import numpy as np


def write_plots(runs_by_policy: dict, out_dir: str, title: str) -> list[str]:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    paths = []
    fig, ax = plt.subplots(figsize=(8, 4.5))
    for policy, runs in runs_by_policy.items():
        end_h = max(float(r.times_s[-1]) / 3600.0 if r.times_s.size else 0.0 for r in runs)
        grid_h = np.linspace(0.0, end_h, 400)
        curves = [np.interp(grid_h, r.times_s / 3600.0, np.cumsum(r.reward_s), left=0.0)
                  if r.times_s.size else np.zeros_like(grid_h) for r in runs]
        ax.plot(grid_h, np.mean(curves, axis=0) / 3600.0, label=policy)
    ax.set_xlabel("simulated clock time (h; one shift per day, flat between shifts)")
    ax.set_ylabel("cumulative robot-hours saved (mean over seeds)")
    ax.set_title(f"{title}: cumulative reward")
    ax.legend(fontsize=8)
    fig.tight_layout()
    paths.append(os.path.join(out_dir, "cumulative_reward.png"))
    fig.savefig(paths[-1], dpi=100)
    plt.close(fig)

    fig, ax = plt.subplots(figsize=(8, 4.5))
    for policy, runs in runs_by_policy.items():
        if policy == "never":
            continue
        ranked = [sorted(r.asks_by_person.values(), reverse=True) for r in runs]
        width = max((len(x) for x in ranked), default=0)
        if not width:
            continue
        mat = np.zeros((len(ranked), width))
        for k, x in enumerate(ranked):
            mat[k, :len(x)] = x
        ax.plot(np.arange(1, width + 1), mat.mean(axis=0), marker=".", label=policy)
    ax.set_xlabel("person rank (most asked first)")
    ax.set_ylabel("asks over the run (mean over seeds)")
    ax.set_xscale("log")
    ax.set_title(f"{title}: asks per person")
    ax.legend(fontsize=8)
    fig.tight_layout()
    paths.append(os.path.join(out_dir, "asks_per_person.png"))
    fig.savefig(paths[-1], dpi=100)
    plt.close(fig)
    return paths
