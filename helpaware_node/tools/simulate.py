"""`helpaware simulate SCENARIO.yaml`: every policy on the same seeds of a simulated site.

Writes a table (terminal), results.json and two PNG plots into --out. Every decision of every
policy goes through core.policy.decide, the node's own decision code path.
"""
from __future__ import annotations

import json
import math
import os
import sys

from .. import package_data
from ..core.baselines import POLICY_NAMES
from ..core.model import CoreInputError
from ..sim.compare import compare, headline, summary_table
from ..sim.plots import write_plots
from ..sim.scenario import load


def add_arguments(parser) -> None:
    parser.add_argument("scenario", help="scenario file (YAML, see docs/scenarios.md), or the "
                        "name of an installed one: " + ", ".join(
                            os.path.splitext(n)[0] for n in package_data.available("scenarios")))
    parser.add_argument("--policies", nargs="+", default=list(POLICY_NAMES),
                        choices=list(POLICY_NAMES), metavar="POLICY",
                        help=f"policies to run (default all: {' '.join(POLICY_NAMES)})")
    parser.add_argument("--seeds", type=int, default=20, help="number of seeds (default 20)")
    parser.add_argument("--first-seed", type=int, default=0, help="first seed (default 0)")
    parser.add_argument("--params", metavar="FILE",
                        help="the node's parameter file (ROS 2 YAML, e.g. config/hospital_night.yaml)"
                             ": simulate with the site's own costs and limits")
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
    model = config = None
    if args.params:
        from ..node_param_file import ParamFileError, load_params
        try:
            loaded = load_params(args.params)
        except ParamFileError as exc:
            print(f"simulate: {exc}", file=sys.stderr)
            return 2
        model, config = loaded.model, loaded.config
        print(f"parameters from {args.params}: {len(loaded.applied)} applied"
              + (f", not used by the decision: {', '.join(loaded.ignored)}" if loaded.ignored
                 else ""))
    summary, per_seed, runs = compare(sc, args.policies, args.seeds, model=model, config=config,
                                      progress=not args.quiet, first_seed=args.first_seed)
    print(f"scenario {sc.name}: {sc.description}")
    print(f"{args.seeds} seeds, mean ± 95 % t half-width over seeds; saved robot-s = help "
          "gained - time lost - interruption cost, against continuing alone")
    print(summary_table(summary))
    head = headline(summary)
    if head:
        ratio = lambda v: "n/a" if math.isinf(v) else f"{v:.2f}x"  # noqa: E731
        print(f"ours vs best baseline ({head['best_baseline']}): reward "
              f"{ratio(head['reward_ratio_vs_best'])}, its asks / ours "
              f"{ratio(head['ask_reduction_vs_best'])}"
              + (f"; {100 * head['share_of_oracle']:.1f} % of the oracle"
                 if "share_of_oracle" in head else ""))
    os.makedirs(args.out, exist_ok=True)
    doc = {"scenario": sc.name, "seeds": args.seeds, "first_seed": args.first_seed,
           "params_file": args.params or None,
           "summary": summary, "headline": head, "per_seed": per_seed,
           "evenness": "Gini coefficient of asks over everyone ever a candidate"}
    with open(os.path.join(args.out, "results.json"), "w", encoding="utf-8") as fh:
        json.dump(_plain(doc), fh, indent=1, sort_keys=True)
    written = [os.path.join(args.out, "results.json")]
    if not args.no_plots:
        written += write_plots(runs, args.out, sc.name)
    print("wrote " + ", ".join(written))
    return 0
