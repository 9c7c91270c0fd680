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

"""All policies on the same seeds of one scenario; summary table, JSON-ready results."""
from __future__ import annotations

import sys
import time
from typing import Any, Callable, Optional, Sequence

import numpy as np

from .metrics import paired_difference, run_metrics, summarise
from .run import run_policy, SIM_POLICY_NAMES
from .scenario import Scenario
from .truth import true_site_model
from .world import ASK_DRAWS_PER_NEED, build_world
from ..core import DecisionConfig, SiteModel
from ..session import SessionRules
from ..text_table import render_table


class ProgressBar:
    """A plain-text bar on stderr, redrawn at most once a second (no colour codes)."""

    def __init__(self, total: int, label: str, stream=None, enabled: bool = True):
        self.total = max(total, 1)
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = enabled
        self.done = 0
        self.start = time.monotonic()
        self.last = -1e9

    def __call__(self, n: int = 1) -> None:
        self.done += n
        now = time.monotonic()
        if self.enabled and (now - self.last >= 1.0 or self.done >= self.total):
            self.last = now
            frac = min(self.done / self.total, 1.0)
            bar = "#" * int(30 * frac) + "." * (30 - int(30 * frac))
            self.stream.write(f"{self.label} [{bar}] {self.done}/{self.total} needs "
                              f"({now - self.start:.1f} s)\n")
            self.stream.flush()


def compare(sc: Scenario, policies: Sequence[str] = SIM_POLICY_NAMES, seeds: int = 20,
            model: Optional[SiteModel] = None, config: Optional[DecisionConfig] = None,
            progress: bool = True, first_seed: int = 0, rules: Optional[SessionRules] = None,
            constants: str = "defaults", learner_factory: Optional[Callable[[], Any]] = None,
            jobs: int = 1):
    """Return (summary by policy, per-seed metrics by policy, runs by policy).

    `rules`: the help session's rules (max_asks_per_need ...), the node's defaults if None.
    `constants`: "defaults" (the robot starts from `model`, the shipped SiteModel if None)
    or "true" (every policy starts from the site's true constants, sim.truth).
    `learner_factory`: a fresh site learner per seed; adds the policy "learning" (ours,
    starting from the same constants, with site learning).
    `jobs`: seeds run in this many processes at once. Each seed is a world of its own, built
    from its seed alone, so the results are the same for any `jobs` (only the order in which
    seeds finish differs; they are put back in seed order). The workers are forked: call it
    with jobs > 1 from a process that runs no other threads (a command line tool, a bench), as
    a fork can inherit a lock another thread holds.
    """
    model = model or SiteModel()
    config = config or DecisionConfig()
    rules = rules or SessionRules()
    if constants not in ("defaults", "true"):
        raise ValueError(f"constants: {constants!r} is not one of defaults, true")
    if not isinstance(jobs, int) or isinstance(jobs, bool) or jobs < 1:
        raise ValueError(f"jobs: {jobs!r} must be a whole number >= 1")
    if constants == "true":
        model = true_site_model(sc, model)
    policies = list(policies)
    if learner_factory is not None and "learning" not in policies:
        policies.insert(1, "learning")
    if "learning" in policies and learner_factory is None:
        raise ValueError("policy learning: needs a learner_factory")
    job = _SeedJob(sc, tuple(policies), model, config, rules, learner_factory)
    seed_list = [first_seed + s for s in range(seeds)]
    serial = jobs == 1 or seeds < 2
    # built here when they run here, or for the bar's total; workers build their own
    worlds = ({s: job.world(s) for s in seed_list} if serial or progress else {})
    total = sum(len(w.needs) for w in worlds.values()) * len(policies) if progress else 1
    bar = ProgressBar(total, f"simulate {sc.name}", enabled=progress)
    if serial:
        by_seed = [job.run(worlds[s], bar) for s in seed_list]
    else:
        worlds.clear()
        by_seed = _in_processes(job, seed_list, min(jobs, seeds), bar)
    runs = {p: [seed_runs[p] for seed_runs in by_seed] for p in policies}
    per_seed = {p: [run_metrics(r) for r in rs] for p, rs in runs.items()}
    summary = {p: summarise(m) for p, m in per_seed.items()}
    return summary, per_seed, runs


class _SeedJob:
    """Every policy on the world of one seed (common random numbers across policies)."""

    def __init__(self, sc, policies, model, config, rules, learner_factory) -> None:
        self.sc, self.policies, self.model, self.config = sc, policies, model, config
        self.rules, self.learner_factory = rules, learner_factory
        # more draws per need than the rules use change nothing else in the world
        self.draws = max(ASK_DRAWS_PER_NEED, rules.max_asks_per_need)

    def world(self, seed: int) -> Any:
        return build_world(self.sc, seed, ask_draws=self.draws)

    def run(self, w: Any, progress: Optional[Callable[[int], None]] = None) -> dict:
        """Return the runs by policy on world `w`."""
        out = {}
        for p in self.policies:
            if p == "learning":
                out[p] = run_policy(w, "ours", self.model, self.config, progress=progress,
                                    rules=self.rules, learner=self.learner_factory(),
                                    label="learning")
            else:
                out[p] = run_policy(w, p, self.model, self.config, progress=progress,
                                    rules=self.rules)
        return out


_FORKED_JOB: Optional[_SeedJob] = None     # the job a forked worker inherits (not pickled)


def _run_forked(seed: int) -> tuple[int, dict, int]:
    assert _FORKED_JOB is not None
    w = _FORKED_JOB.world(seed)
    return seed, _FORKED_JOB.run(w), len(w.needs)


def _in_processes(job: _SeedJob, seeds: list, jobs: int, bar: ProgressBar) -> list:
    """Seeds in forked worker processes.

    The job (with its learner factory, often a lambda) is inherited through fork rather than
    pickled; the runs come back pickled.
    """
    import multiprocessing
    global _FORKED_JOB
    _FORKED_JOB = job
    try:
        done: dict = {}
        # multiprocessing.Pool forks every worker in its constructor, before it starts its
        # own threads (a ProcessPoolExecutor forks on demand beside its queue threads, and a
        # child can inherit a lock one of them holds: seen here as a hung worker)
        with multiprocessing.get_context("fork").Pool(jobs) as pool:
            for seed, runs, needs in pool.imap_unordered(_run_forked, seeds):
                done[seed] = runs
                bar(needs * len(job.policies))
        return [done[s] for s in seeds]
    finally:
        _FORKED_JOB = None


def _ci(cell: dict, digits: int = 0) -> str:
    if cell["mean"] != cell["mean"]:   # NaN: undefined for this policy (asks per help, no help)
        return "-"
    if cell["ci95"] != cell["ci95"]:   # one seed: no interval
        return f"{cell['mean']:.{digits}f}"
    return f"{cell['mean']:.{digits}f} ± {cell['ci95']:.{digits}f}"


def summary_table(summary: dict) -> str:
    rows = []
    for p, s in summary.items():
        rows.append([p, _ci(s["reward_s"]), _ci(s["reward_second_half_s"]),
                     _ci(s["interruption_s"]), _ci(s["asks"]), _ci(s["helps"]),
                     _ci(s["asks_per_help"], 2), _ci(s["max_asks_person_day"], 1),
                     _ci(s["gini_asks"], 2)])
    return render_table(["policy", "saved robot-s", "2nd half", "interruption s", "asks",
                         "helps", "asks/help", "max asks/person/day", "Gini of asks"], rows,
                        [False] + [True] * 8)


def mostly_regulars(sc: Scenario) -> bool:
    """Return a site of regulars: at least 2/3 of the people in view at a need are regulars."""
    total = sc.regulars_per_need + sc.strangers_per_need
    return total > 0 and sc.regulars_per_need >= 2.0 * total / 3.0


def _paired(per_seed: dict, x: str, y: Optional[str], key: str, ratio: float = 1.0) -> dict:
    xs = [m[key] for m in per_seed[x]]
    ys = [m[key] for m in per_seed[y]] if y is not None else [0.0] * len(xs)
    out = paired_difference(xs, ys, ratio)
    out.update(x=x, y=y or "0", key=key, x_mean=float(np.mean(xs)), y_mean=float(np.mean(ys)))
    return out


def regret(per_seed: dict, start: str = "ours") -> dict:
    """Return the regret of not knowing the site.

    Informed minus the policy that starts from the robot's constants, over the whole run and over
    its second half (paired over seeds).
    """
    if "informed" not in per_seed or start not in per_seed:
        return {}
    return {half: _paired(per_seed, "informed", start, key)
            for half, key in (("whole", "reward_s"), ("second_half", "reward_second_half_s"))}


def targets(sc: Scenario, per_seed: dict) -> dict:
    """Return the issue's targets for the policy that starts from the shipped defaults.

    The issue's targets for the policy that starts from the shipped defaults (`learning` when it
    ran, else `ours`), each a paired comparison over seeds (metrics.paired_difference).
    """
    start = "learning" if "learning" in per_seed else "ours"
    out: dict = {"start": start}
    have = set(per_seed)
    if "informed" in have:
        out["vs_informed_second_half"] = _paired(per_seed, start, "informed",
                                                 "reward_second_half_s", 0.95)
        out["informed_vs_ours"] = _paired(per_seed, "informed", "ours", "reward_s")
    if "never" in have:
        out["vs_never"] = _paired(per_seed, start, "never", "reward_s")
    if "thompson" in have:
        out["vs_thompson"] = _paired(per_seed, start, "thompson", "reward_s")
    if "oracle" in have and mostly_regulars(sc):
        out["vs_oracle"] = _paired(per_seed, start, "oracle", "reward_s", 0.95)
    for p in ("informed", "ours"):
        if "oracle" in have and p in have:
            out[f"oracle_vs_{p}"] = _paired(per_seed, "oracle", p, "reward_s")
    return out


def describe_pair(cell: dict, what: str) -> str:
    scale = "" if cell["ratio"] == 1.0 else f"{cell['ratio']:g} x "
    return (f"{what}: {cell['x']} {cell['x_mean']:.0f} vs {scale}{cell['y']} "
            f"{cell['y_mean']:.0f}; difference {cell['mean']:.0f} ± {cell['ci95']:.0f} "
            f"(paired, {cell['n']} seeds): {cell['verdict']}")


def describe_regret(cell: dict, half: str) -> str:
    where = "whole run" if half == "whole" else "second half"
    return (f"regret of not knowing the site ({where}): informed {cell['x_mean']:.0f} - "
            f"{cell['y']} {cell['y_mean']:.0f} = {cell['mean']:.0f} ± {cell['ci95']:.0f} "
            f"robot-s (paired over {cell['n']} seeds)")


TARGET_LABELS = {
    "vs_informed_second_half": "second half, >= 95 % of the site-informed policy",
    "informed_vs_ours": "true constants never worse than the defaults",
    "vs_never": "never below never",
    "vs_thompson": "ahead of Thompson sampling",
    "vs_oracle": "site of regulars, >= 95 % of the oracle",
    "oracle_vs_informed": "oracle a ceiling over informed",
    "oracle_vs_ours": "oracle a ceiling over ours",
}
