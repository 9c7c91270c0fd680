"""All policies on the same seeds of one scenario; summary table, JSON-ready results."""
from __future__ import annotations

import sys
import time
from typing import Any, Callable, Optional, Sequence

import numpy as np

from ..core import DecisionConfig, SiteModel
from ..session import SessionRules
from ..text_table import render_table
from .metrics import paired_difference, run_metrics, summarise
from .run import SIM_POLICY_NAMES, run_policy
from .scenario import Scenario
from .truth import true_site_model
from .world import ASK_DRAWS_PER_NEED, build_world


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
            constants: str = "defaults", learner_factory: Optional[Callable[[], Any]] = None):
    """Return (summary by policy, per-seed metrics by policy, runs by policy).

    `rules`: the help session's rules (max_asks_per_need ...), the node's defaults if None.
    `constants`: "defaults" (the robot starts from `model`, the shipped SiteModel if None)
    or "true" (every policy starts from the site's true constants, sim.truth).
    `learner_factory`: a fresh site learner per seed; adds the policy "learning" (ours,
    starting from the same constants, with site learning).
    """
    model = model or SiteModel()
    config = config or DecisionConfig()
    rules = rules or SessionRules()
    if constants not in ("defaults", "true"):
        raise ValueError(f"constants: {constants!r} is not one of defaults, true")
    if constants == "true":
        model = true_site_model(sc, model)
    policies = list(policies)
    if learner_factory is not None and "learning" not in policies:
        policies.insert(1, "learning")
    draws = max(ASK_DRAWS_PER_NEED, rules.max_asks_per_need)   # more draws change no other
    worlds = [build_world(sc, first_seed + s, ask_draws=draws) for s in range(seeds)]
    total = sum(len(w.needs) for w in worlds) * len(policies)
    bar = ProgressBar(total, f"simulate {sc.name}", enabled=progress)
    runs: dict[str, list[Any]] = {p: [] for p in policies}
    for w in worlds:
        for p in policies:
            if p == "learning":
                if learner_factory is None:
                    raise ValueError("policy learning: needs a learner_factory")
                runs[p].append(run_policy(w, "ours", model, config, progress=bar, rules=rules,
                                          learner=learner_factory(), label="learning"))
            else:
                runs[p].append(run_policy(w, p, model, config, progress=bar, rules=rules))
    per_seed = {p: [run_metrics(r) for r in rs] for p, rs in runs.items()}
    summary = {p: summarise(m) for p, m in per_seed.items()}
    return summary, per_seed, runs


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
