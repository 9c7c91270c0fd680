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

"""Simulator speed, and every policy on every site with the issue's targets (paired over seeds).

Speed: 50 000 simulated help needs (look-ahead policy, hospital scenario) timed end to end,
beside the bare core.decide() calls for the same needs and candidates measured in the same run
(ratio = what the simulator adds around the decision: the help session, its store, and the
decisions again after a decline, counted and shown per decision). Target: under 60 s.

Sites: scenarios/*.yaml (shipped) and bench/sites/*.yaml (invented for this benchmark, where
the shipped defaults are far from the truth; no test reads them). Every policy runs on the same
seeds of a site (common random numbers), the reward is the world's. Rows: `ours` starts from
the shipped defaults; `informed` is ours given the site's true constants; `learning` is ours
from the shipped defaults with online site learning (helpaware_node.fit.online.SiteLearner,
when that module exists; otherwise a line says the row was not run); the two `(no look-ahead)`
rows are ours and informed with lookahead_horizon_s = 0. Targets, each a paired 95 % t
interval over seeds ("met": the whole interval on the right side; "missed": all of it on the
wrong side; "undecided": it holds the target): the policy that starts from the defaults
(`learning` when it ran, else `ours`) >= 95 % of informed over the second half of each run,
never below `never`, ahead of Thompson sampling, >= 95 % of the oracle on sites of regulars;
informed never below ours; the oracle at or above both.

Seeds: 20 per site, 10 on the two concourse sites (thousands of strangers make them the
slowest); the learning row runs on as many of the first seeds as its share of the 900 s
limit of bench/run_all.py allows (at least 2 for an interval), and is paired on those. Seeds
run in as many processes as the machine has CPUs (sim.compare's `jobs`: the same figures as
one process, sooner).

A reduced run, for a quick look (its figures are not RESULTS.md's): `--seeds N` (at most N
seeds per site), `--sites NAME ...` (scenario names), `--no-speed`. A reduced run writes no
PNGs, so bench/figures stays the full run's.
"""
from __future__ import annotations

import argparse
import dataclasses
import glob
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))

from helpaware_node.core import (  # noqa: E402  # noqa: E402
    candidate_from_record,
    decide,
    DecisionConfig,
    HelpNeed,
    PersonRecord,
    SiteModel,
)
from helpaware_node.sim.compare import (  # noqa: E402
    compare,
    describe_pair,
    describe_regret,
    regret,
    summary_table,
    TARGET_LABELS,
    targets,
)
from helpaware_node.sim.metrics import paired_difference, run_metrics, summarise  # noqa: E402
from helpaware_node.sim.plots import write_plots  # noqa: E402
from helpaware_node.sim.run import run_policy  # noqa: E402
from helpaware_node.sim.scenario import load  # noqa: E402
from helpaware_node.sim.truth import describe_model, true_site_model  # noqa: E402
from helpaware_node.sim.world import build_world  # noqa: E402

TARGET_NEEDS = 50_000
LIMIT_S = 900.0           # bench/run_all.py's limit per benchmark
SAFETY_S = 60.0           # kept free for printing and a slow machine
SEEDS = 20
SLOW_SITES_SEEDS = 10     # the concourse sites
SLOW_SITES = ("transit_concourse_busy", "concourse_unwilling_strangers")
POLICIES = ("ours", "informed", "never", "nearest", "busyness", "willingness", "thompson",
            "oracle", "oracle_greedy")
START = time.monotonic()
JOBS = os.cpu_count() or 1  # seeds in parallel processes: the same figures, sooner


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


def site_learner_factory():
    """Return (factory, None) when fit.online.SiteLearner can be built, else (None, the reason)."""
    try:
        from helpaware_node.fit.online import LearningSettings, SiteLearner
    except ImportError as exc:
        return None, f"helpaware_node.fit.online is not importable ({exc})"
    try:
        SiteLearner(SiteModel(), LearningSettings(mode="apply"))
    except Exception as exc:  # noqa: BLE001 - report whatever the other module refuses
        return None, f"SiteLearner could not be built ({type(exc).__name__}: {exc})"
    return (lambda: SiteLearner(SiteModel(), LearningSettings(mode="apply"))), None


def no_lookahead(sc, seeds: int) -> dict:
    config = dataclasses.replace(DecisionConfig(), lookahead_horizon_s=0.0)
    _, per_seed, _ = compare(sc, ["ours", "informed"], seeds=seeds, config=config,
                             progress=False, jobs=JOBS)
    return {f"{p} (no look-ahead)": m for p, m in per_seed.items()}


def learning_rows(sc, factory, seeds: int, budget_s: float) -> tuple[list, list, float]:
    """Run `learning` on the first seeds while the budget lasts.

    Runs of `learning` on the first seeds while the budget lasts (at least one batch of JOBS seeds,
    run side by side).
    """
    runs, t0 = [], time.monotonic()
    while budget_s > 0.0 and len(runs) < seeds:
        if runs and time.monotonic() - t0 > budget_s * len(runs) / (len(runs) + JOBS):
            break    # one more batch would not fit the share
        batch = min(JOBS, seeds - len(runs))
        _, _, got = compare(sc, [], seeds=batch, first_seed=len(runs), progress=False,
                            learner_factory=factory, jobs=JOBS)
        runs += got["learning"]
    return runs, [run_metrics(r) for r in runs], time.monotonic() - t0


def print_site(sc, seeds, summary, per_seed, elapsed, learn) -> None:
    print(f"\nsite {sc.name} ({sc.description}; truth: {sc.truth_model}; {seeds} seeds) "
          f"[{elapsed:.1f} s]")
    print(f"  site-informed constants: {describe_model(true_site_model(sc))}")
    first = [p for p in ("ours", "learning", "informed", "ours (no look-ahead)",
                         "informed (no look-ahead)") if p in summary]
    print(summary_table({p: summary[p] for p in first + [q for q in summary if q not in first]}))
    for half, cell in regret(per_seed).items():
        print(describe_regret(cell, half))
    for name in ("ours", "informed"):
        off = f"{name} (no look-ahead)"
        if off in per_seed:
            cell = paired_difference([m["reward_s"] for m in per_seed[name]],
                                     [m["reward_s"] for m in per_seed[off]])
            base = summary[off]["reward_s"]["mean"]
            share = f" ({100 * cell['mean'] / abs(base):+.1f} %)" if base else ""
            print(f"look-ahead on - off, {name}: {cell['mean']:.0f} ± {cell['ci95']:.0f} "
                  f"robot-s{share} (paired, {cell['n']} seeds)")
    rows = {p: m for p, m in per_seed.items() if "(no look-ahead)" not in p}
    print(f"targets for `ours` (the shipped defaults, no site learning; {seeds} seeds):")
    for name, cell in targets(sc, rows).items():
        if isinstance(cell, dict):
            print("  " + describe_pair(cell, TARGET_LABELS[name]))
    if learn is None:
        return
    runs, metrics, spent = learn
    n = len(metrics)
    if not n:
        print("learning row not run on this site: no time left in the 900 s limit")
        return
    paired = {p: m[:n] for p, m in rows.items()}
    paired["learning"] = metrics
    print(f"targets for `learning` (from the shipped defaults with site learning; first {n} "
          f"seeds, {spent:.0f} s; refits applied per run: "
          f"{', '.join(str(sum(r[1] for r in run.refits)) for run in runs)}):")
    for name, cell in targets(sc, paired).items():
        if isinstance(cell, dict) and cell["x"] == "learning":
            print("  " + describe_pair(cell, TARGET_LABELS[name]))


def parse_args(argv):
    ap = argparse.ArgumentParser(description="simulator speed and the policy comparison on "
                                 "every site (module doc)")
    ap.add_argument("--seeds", type=int, default=None,
                    help="at most this many seeds per site (a reduced run: no PNGs written)")
    ap.add_argument("--sites", nargs="+", metavar="NAME", default=None,
                    help="only these sites, by scenario name (a reduced run: no PNGs written)")
    ap.add_argument("--no-speed", action="store_true", help="skip the speed measurement")
    args = ap.parse_args(argv)
    if args.seeds is not None and args.seeds < 2:
        ap.error("--seeds: at least 2 (a paired interval needs two seeds)")
    return args


def main(argv=None) -> int:
    args = parse_args(argv)
    reduced = args.seeds is not None or args.sites is not None
    root = os.path.dirname(HERE)
    if not args.no_speed:
        speed(os.path.join(root, "scenarios", "hospital_night.yaml"))
    fig_dir = os.path.join(HERE, "figures")
    os.makedirs(fig_dir, exist_ok=True)
    paths = (sorted(glob.glob(os.path.join(root, "scenarios", "*.yaml")))
             + sorted(glob.glob(os.path.join(HERE, "sites", "*.yaml"))))
    if args.sites is not None:
        known = {os.path.splitext(os.path.basename(p))[0]: p for p in paths}
        unknown = [n for n in args.sites if n not in known]
        if unknown:
            print(f"bench_sim: --sites: unknown {', '.join(unknown)} (known: "
                  f"{', '.join(sorted(known))})", file=sys.stderr)
            return 2
        paths = [known[n] for n in args.sites]
    factory, why_not = site_learner_factory()
    print()
    print("policy comparison: mean ± 95 % t half-width over seeds; reward = the world's "
          "robot-s saved against continuing alone (its costs, its true ask load); 2nd half = "
          "the needs in the second half of the run; interruption s = what the world bore")
    if why_not:
        print(f"learning row not run: {why_not}")
    sites = []
    for path in paths:
        sc = load(path)
        seeds = SLOW_SITES_SEEDS if sc.name in SLOW_SITES else SEEDS
        if args.seeds is not None:
            seeds = min(seeds, args.seeds)
        t0 = time.perf_counter()
        summary, per_seed, runs = compare(sc, POLICIES, seeds=seeds, progress=False, jobs=JOBS)
        per_seed.update(no_lookahead(sc, seeds))
        summary.update({p: summarise(m) for p, m in per_seed.items() if p not in summary})
        sites.append([sc, seeds, summary, per_seed, time.perf_counter() - t0, None])
        if reduced:
            continue
        sub = os.path.join(fig_dir, sc.name)
        os.makedirs(sub, exist_ok=True)
        for p in write_plots({k: v for k, v in runs.items() if k in POLICIES}, sub, sc.name):
            os.replace(p, os.path.join(fig_dir, f"{sc.name}_{os.path.basename(p)}"))
        os.rmdir(sub)
    if factory is not None:
        for k, site in enumerate(sites):
            left = LIMIT_S - SAFETY_S - (time.monotonic() - START)
            share = max(left, 0.0) / (len(sites) - k)
            site[5] = learning_rows(site[0], factory, site[1], share)
            if site[5][1]:
                site[2]["learning"] = summarise(site[5][1])
    for sc, seeds, summary, per_seed, elapsed, learn in sites:
        print_site(sc, seeds, summary, per_seed, elapsed, learn)
    print(f"\nbench_sim: {time.monotonic() - START:.0f} s in all"
          + (" (a reduced run: not RESULTS.md's figures, no PNGs written)" if reduced else ""))
    return 0


if __name__ == "__main__":
    sys.exit(main())
