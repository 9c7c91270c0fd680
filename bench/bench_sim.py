"""Simulator speed and the policy comparison on every scenario (20 seeds each).

Speed: 50 000 simulated help needs (look-ahead policy, hospital scenario) timed end to end,
beside the bare core.decide() calls for the same needs and candidates measured in the same run
(ratio = what the simulator adds around the decision: the help session, its store, and the
decisions again after a decline, counted and shown per decision). Target: under 60 s.
Comparison: every policy on the same 20 seeds of each scenarios/*.yaml; the headline ratios
the issue asks for. Figures go to bench/figures/.
"""
from __future__ import annotations

import glob
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from helpaware_node.core import DecisionConfig, SiteModel, candidate_from_record, decide  # noqa: E402
from helpaware_node.core import HelpNeed, PersonRecord  # noqa: E402
from helpaware_node.sim.compare import compare, headline, summary_table  # noqa: E402
from helpaware_node.sim.plots import write_plots  # noqa: E402
from helpaware_node.sim.run import run_policy  # noqa: E402
from helpaware_node.sim.scenario import load  # noqa: E402
from helpaware_node.sim.world import build_world  # noqa: E402

TARGET_NEEDS = 50_000


def speed(scenario_path: str) -> None:
    sc = load(scenario_path)
    model, config = SiteModel(), DecisionConfig()
    worlds, n = [], 0
    t0 = time.perf_counter()
    while n < TARGET_NEEDS:
        worlds.append(build_world(sc, 1000 + len(worlds)))
        n += len(worlds[-1].needs)
    t_build = time.perf_counter() - t0
    t0 = time.perf_counter()
    decisions = sum(run_policy(w, "ours", model, config).decisions_made for w in worlds)
    t_run = time.perf_counter() - t0
    # the bare decisions for the same needs (fresh records: the decide() work alone)
    t0 = time.perf_counter()
    rec = PersonRecord.new(model)
    for w in worlds:
        for need in w.needs:
            t = need.time_s
            cands = [candidate_from_record(s.person_id, rec, t, model, s.distance_m, t,
                                           s.busyness, s.activity) for s in need.seen]
            decide(HelpNeed(need.request_id, need.kind, t, continue_cost_s=need.continue_cost_s,
                            help_time_s=need.help_time_s), cands, t, [], model, config)
    t_bare = time.perf_counter() - t0
    total = t_build + t_run
    print(f"speed: {n} simulated help needs ({len(worlds)} hospital_night worlds)")
    print(f"  build worlds {t_build:.2f} s + run look-ahead policy {t_run:.2f} s = {total:.2f} s "
          f"({'meets' if total < 60 else 'MISSES'} the 60 s target; {n / total:.0f} needs/s)")
    print(f"  bare core.decide() for the same needs: {t_bare:.2f} s; simulator run / bare decide "
          f"= {t_run / t_bare:.2f}x")
    print(f"  the run made {decisions} decisions ({decisions / n:.2f} per need: a need is "
          f"decided again after a decline); per decision {t_run / decisions * 1e3:.3f} ms, "
          f"bare {t_bare / n * 1e3:.3f} ms")


def main() -> int:
    speed(os.path.join(os.path.dirname(HERE), "scenarios", "hospital_night.yaml"))
    fig_dir = os.path.join(HERE, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    print()
    print("policy comparison: 20 seeds per scenario, mean ± 95 % t half-width over seeds")
    print("targets: reward >= 1.5x the best non-oracle baseline, asks >= 1.2x fewer than it, "
          ">= 85 % of the oracle")
    for path in sorted(glob.glob(os.path.join(os.path.dirname(HERE), "scenarios", "*.yaml"))):
        sc = load(path)
        t0 = time.perf_counter()
        summary, _, runs = compare(sc, seeds=20, progress=False)
        print(f"\nscenario {sc.name} ({sc.description}; truth: {sc.truth_model}) "
              f"[{time.perf_counter() - t0:.1f} s]")
        print(summary_table(summary))
        h = headline(summary)
        print(f"ours / best baseline ({h['best_baseline']}) reward = {h['reward_ratio_vs_best']:.2f}x "
              f"(target 1.5x: {'met' if h['meets_reward_target'] else 'missed'}); "
              f"its asks / ours = {h['ask_reduction_vs_best']:.2f}x "
              f"(target 1.2x: {'met' if h['meets_ask_target'] else 'missed'}); "
              f"ours / oracle reward = {100 * h['share_of_oracle']:.1f} % "
              f"(target 85 %: {'met' if h['meets_oracle_target'] else 'missed'})")
        sub = os.path.join(fig_dir, sc.name)
        os.makedirs(sub, exist_ok=True)
        for p in write_plots(runs, sub, sc.name):
            os.replace(p, os.path.join(fig_dir, f"{sc.name}_{os.path.basename(p)}"))
        os.rmdir(sub)
    return 0


if __name__ == "__main__":
    sys.exit(main())
