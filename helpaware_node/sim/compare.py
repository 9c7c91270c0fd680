"""All policies on the same seeds of one scenario; summary table, JSON-ready results."""
from __future__ import annotations

import sys
import time
from typing import Optional, Sequence

from ..core import DecisionConfig, SiteModel
from ..core.baselines import POLICY_NAMES
from ..text_table import render_table
from .metrics import run_metrics, summarise
from .run import run_policy
from .scenario import Scenario
from .world import build_world


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


def compare(sc: Scenario, policies: Sequence[str] = POLICY_NAMES, seeds: int = 20,
            model: Optional[SiteModel] = None, config: Optional[DecisionConfig] = None,
            progress: bool = True, first_seed: int = 0):
    """Returns (summary by policy, per-seed metrics by policy, runs by policy)."""
    model = model or SiteModel()
    config = config or DecisionConfig()
    worlds = [build_world(sc, first_seed + s) for s in range(seeds)]
    total = sum(len(w.needs) for w in worlds) * len(policies)
    bar = ProgressBar(total, f"simulate {sc.name}", enabled=progress)
    runs = {p: [] for p in policies}
    for w in worlds:
        for p in policies:
            runs[p].append(run_policy(w, p, model, config, progress=bar))
    per_seed = {p: [run_metrics(r) for r in rs] for p, rs in runs.items()}
    summary = {p: summarise(m) for p, m in per_seed.items()}
    return summary, per_seed, runs


def _ci(cell: dict, digits: int = 0) -> str:
    if cell["mean"] != cell["mean"]:   # NaN: undefined for this policy (asks per help, no help)
        return "-"
    return f"{cell['mean']:.{digits}f} ± {cell['ci95']:.{digits}f}"


def summary_table(summary: dict) -> str:
    rows = []
    for p, s in summary.items():
        rows.append([p, _ci(s["reward_s"]), _ci(s["asks"]), _ci(s["helps"]), _ci(s["declines"]),
                     _ci(s["asks_per_help"], 2), _ci(s["max_asks_person_day"], 1),
                     _ci(s["gini_asks"], 2)])
    return render_table(["policy", "saved robot-s", "asks", "helps", "declines", "asks/help",
                         "max asks/person/day", "Gini of asks"], rows,
                        [False] + [True] * 7)


def headline(summary: dict) -> dict:
    """Ours against the best non-oracle baseline and the oracle (the issue's targets)."""
    base = {p: s for p, s in summary.items() if p not in ("ours", "oracle")}
    out = {}
    if "ours" not in summary or not base:
        return out
    ours = summary["ours"]
    best = max(base, key=lambda p: base[p]["reward_s"]["mean"])
    out["best_baseline"] = best
    br = base[best]["reward_s"]["mean"]
    out["reward_ratio_vs_best"] = ours["reward_s"]["mean"] / br if br > 0 else float("inf")
    oa = ours["asks"]["mean"]
    out["ask_reduction_vs_best"] = base[best]["asks"]["mean"] / oa if oa > 0 else float("inf")
    if "oracle" in summary:
        orr = summary["oracle"]["reward_s"]["mean"]
        out["share_of_oracle"] = ours["reward_s"]["mean"] / orr if orr > 0 else float("nan")
    out["meets_reward_target"] = out["reward_ratio_vs_best"] >= 1.5
    out["meets_ask_target"] = out["ask_reduction_vs_best"] >= 1.2
    out["meets_oracle_target"] = out.get("share_of_oracle", 0.0) >= 0.85
    return out
