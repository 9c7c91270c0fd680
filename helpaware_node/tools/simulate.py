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

"""`helpaware simulate SCENARIO.yaml`: every policy on the same seeds of a simulated site.

Writes a table (terminal), results.json and two PNG plots into --out. Every policy runs in the
node's own help session (asking again after a decline, up to max_asks_per_need), and every
decision goes through core.policy.decide, the node's own decision code path. The reward is
the world's (its costs, its truth), whatever the robot's parameters. The regret of not knowing
the site is `informed` (ours told the site's true constants) minus `ours`, over the whole run
and its second half. `--encounters` prints the re-encounter check instead (sim/encounters.py).
"""
from __future__ import annotations

import json
import math
import os
import sys

from .. import package_data
from ..core import DecisionConfig, SiteModel
from ..core.model import CoreInputError, to_plain
from ..sim.compare import (
    compare,
    describe_pair,
    describe_regret,
    regret,
    summary_table,
    TARGET_LABELS,
    targets,
)
from ..sim.encounters import report as encounter_report
from ..sim.plots import write_plots
from ..sim.run import SIM_POLICY_NAMES
from ..sim.scenario import load
from ..sim.truth import describe_model, true_site_model


def add_arguments(parser) -> None:
    parser.add_argument("scenario", help="scenario file (YAML, see docs/scenarios.md), or the "
                        "name of an installed one: " + ", ".join(
                            os.path.splitext(n)[0] for n in package_data.available("scenarios")))
    parser.add_argument("--policies", nargs="+", default=list(SIM_POLICY_NAMES),
                        choices=list(SIM_POLICY_NAMES), metavar="POLICY",
                        help=f"policies to run (default all: {' '.join(SIM_POLICY_NAMES)}; "
                             "informed = ours given the site's true constants; oracle = the "
                             "ceiling, oracle_greedy = the true advantage now only)")
    parser.add_argument("--seeds", type=int, default=20, help="number of seeds (default 20)")
    parser.add_argument("--first-seed", type=int, default=0, help="first seed (default 0)")
    parser.add_argument("--jobs", type=int, default=1, metavar="N",
                        help="seeds run in N processes at once (default 1); the results are "
                        "the same for any N")
    parser.add_argument("--params", metavar="FILE",
                        help="the node's parameter file (ROS 2 YAML, e.g. "
                             "config/hospital_night.yaml): simulate with the site's own costs "
                             "and limits")
    parser.add_argument("--constants", choices=("defaults", "true"), default="defaults",
                        help="what the robot starts from: the shipped defaults (or --params), "
                             "or the site's true constants (docs/scenarios.md)")
    parser.add_argument("--encounters", action="store_true",
                        help="print the re-encounter check (the robot's N against how often "
                             "people really come back) and run no policy")
    parser.add_argument("--out", default="out/simulate", help="output directory for JSON and PNGs")
    parser.add_argument("--no-plots", action="store_true", help="skip the PNG plots")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")


def _plain(value):
    if isinstance(value, float) and (math.isnan(value) or math.isinf(value)):
        return None
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    return value


def run(args) -> int:
    if args.seeds < 1:
        print("simulate: --seeds must be at least 1", file=sys.stderr)
        return 2
    if args.jobs < 1:
        print(f"simulate: --jobs must be at least 1 (got {args.jobs})", file=sys.stderr)
        return 2
    path = package_data.data_file("scenarios", args.scenario)   # a path, or an installed name
    if not os.path.exists(path):
        print(f"simulate: no scenario file {args.scenario!r} (installed: "
              f"{', '.join(package_data.available('scenarios')) or 'none'})", file=sys.stderr)
        return 2
    try:
        sc = load(path)
    except CoreInputError as exc:
        print(f"simulate: {exc}", file=sys.stderr)
        return 2
    model = config = rules = None
    if args.params:
        from ..node_param_file import load_params, ParamFileError
        try:
            loaded = load_params(args.params)
        except ParamFileError as exc:
            print(f"simulate: {exc}", file=sys.stderr)
            return 2
        model, config, rules = loaded.model, loaded.config, loaded.rules
        print(f"parameters from {args.params}: {len(loaded.applied)} applied"
              + (f", not used by the decision: {', '.join(loaded.ignored)}" if loaded.ignored
                 else ""))
    if args.encounters:
        print(encounter_report([sc], config or DecisionConfig(), seeds=args.seeds))
        return 0
    truth = true_site_model(sc, model or SiteModel())
    print(f"site's true constants (policy informed): {describe_model(truth)}")
    try:
        summary, per_seed, runs = compare(sc, args.policies, args.seeds, model=model,
                                          config=config, progress=not args.quiet,
                                          first_seed=args.first_seed, rules=rules,
                                          constants=args.constants, jobs=args.jobs)
    except CoreInputError as exc:      # e.g. more asks per need than the world draws
        print(f"simulate: {exc}", file=sys.stderr)
        return 2
    print(f"scenario {sc.name}: {sc.description}")
    print(f"{args.seeds} seeds, mean ± 95 % t half-width over seeds; the robot starts from "
          f"{'the true constants' if args.constants == 'true' else 'its parameters'}; saved "
          "robot-s = help gained - time lost - interruption cost (the world's), against "
          "continuing alone; 2nd half = the same over the second half of the run")
    print(summary_table(summary))
    lost = regret(per_seed)
    for half, cell in lost.items():
        print(describe_regret(cell, half))
    head = targets(sc, per_seed)
    for name, cell in head.items():
        if isinstance(cell, dict):
            print(describe_pair(cell, TARGET_LABELS.get(name, name)))
    os.makedirs(args.out, exist_ok=True)
    doc = {"scenario": sc.name, "seeds": args.seeds, "first_seed": args.first_seed,
           "params_file": args.params or None,
           "constants": args.constants, "true_constants": to_plain(truth),
           "summary": summary, "regret": lost, "targets": head, "per_seed": per_seed,
           "evenness": "Gini coefficient of asks over everyone ever a candidate"}
    with open(os.path.join(args.out, "results.json"), "w", encoding="utf-8") as fh:
        json.dump(_plain(doc), fh, indent=1, sort_keys=True)
    written = [os.path.join(args.out, "results.json")]
    if not args.no_plots:
        written += write_plots(runs, args.out, sc.name)
    print("wrote " + ", ".join(written))
    return 0
