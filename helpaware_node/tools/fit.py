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

"""`helpaware fit INPUT... --out tuned.yaml`: site constants from logged outcomes.

Inputs are outcome CSV files (the store export) or bags.  Prints the estimates with standard
errors and the convergence verdict, the likelihood-ratio test of the context terms, held-out
log loss of the site model beside a random-intercept logistic model (GLMM), and a calibration
table; writes the node's parameter file.  Exit codes: 0 written; 2 bad arguments or input;
3 the fit did not converge (the verdict line says why; nothing written).
"""
from __future__ import annotations

import argparse
import datetime
import math
import os
import sys
from typing import Optional

from ..fit.data import FitInputError, read_outcome_csv
from ..fit.heldout import kfold
from ..fit.paramfile import DEFAULT_NODE_NAME, FITTED_NAMES, render_param_file
from ..fit.progress import Progress
from ..fit.site_fit import context_test, fit_site, NAMES
from ..text_table import render_table

LONG_FIT_ROWS = 20000
HALF_LIFE = "ask_memory_half_life_s"   # written to the file only when estimated
NOT_CONVERGED = 3
# the option behind a verdict's "what to try", where the command has one
CAUSE_OPTION = {"iteration_limit": "--max-iter", "still_rising": "--max-iter"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("inputs", nargs="+", metavar="INPUT",
                        help="outcome CSV files (store export) or bag directories / files")
    parser.add_argument("--out", required=True, help="parameter file to write (YAML)")
    parser.add_argument("--node-name", default=DEFAULT_NODE_NAME,
                        help=f"node name the file is keyed by (default {DEFAULT_NODE_NAME})")
    parser.add_argument("--folds", type=int, default=5, help="k of the k-fold over people "
                        "(0 skips the held-out comparison)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the fold assignment")
    parser.add_argument("--notice-probability", type=float, default=0.8,
                        help="kept when the data cannot estimate it (no no-response rows)")
    parser.add_argument("--ask-memory-half-life-s", type=float, default=1800.0,
                        help="where the data carry ask times (the store export's ask rows, "
                        "bags, or a CSV without ask_load) the half-life is estimated from "
                        "here; with --fix-half-life it is kept at this value")
    parser.add_argument("--fix-half-life", action="store_true",
                        help="keep ask_memory_half_life_s at --ask-memory-half-life-s")
    parser.add_argument("--no-busy", action="store_true", help="fix k_busy at 0")
    parser.add_argument("--no-load", action="store_true", help="fix k_load at 0")
    parser.add_argument("--max-iter", type=int, default=500,
                        help="iteration limit of the optimiser (default 500)")
    parser.add_argument("--progress", choices=("auto", "on", "off"), default="auto",
                        help="progress lines on stderr (auto: for long fits)")


def _load(inputs, half_life_s):
    csvs = [p for p in inputs if p.lower().endswith(".csv")]
    bags = [p for p in inputs if p not in csvs]
    if csvs and bags:
        raise FitInputError("give either CSV files or bags, not both")
    if bags:
        from ..fit.bags import read_outcome_bags
        return read_outcome_bags(bags)
    return read_outcome_csv(csvs, half_life_s)


def _fmt(v: Optional[float]) -> str:
    return "n/a" if v is None or (isinstance(v, float) and math.isnan(v)) else f"{v:.4g}"


def verdict_line(verdict) -> str:
    """Return the verdict as printed, with the option to change where the command has one."""
    option = CAUSE_OPTION.get(verdict.cause)
    return verdict.line() + (f" ({option})" if option else "")


def run(args: argparse.Namespace) -> int:
    for name, value, low, high in (("--notice-probability", args.notice_probability, 0.0, 1.0),
                                   ("--ask-memory-half-life-s", args.ask_memory_half_life_s,
                                    1e-9, 1e12), ("--folds", args.folds, 0, 1000),
                                   ("--max-iter", args.max_iter, 1, 100000)):
        if not low <= value <= high:
            print(f"fit: {name} {value!r} is outside [{low:g}, {high:g}]", file=sys.stderr)
            return 2
    try:
        data = _load(args.inputs, args.ask_memory_half_life_s)
        show = args.progress == "on" or (args.progress == "auto"
                                         and data.n_outcomes >= LONG_FIT_ROWS)
        fit = fit_site(data, fix_k_busy=args.no_busy, fix_k_load=args.no_load,
                       notice_probability=args.notice_probability,
                       progress=Progress("fit", enabled=show), max_iter=args.max_iter,
                       half_life_s=args.ask_memory_half_life_s,
                       fit_half_life=not args.fix_half_life)
    except FitInputError as exc:
        print(f"fit: {exc}", file=sys.stderr)
        return 2
    counts = data.counts()
    print(f"data: {', '.join(data.sources)}: {data.n_people} people, {data.n_outcomes} answered "
          f"asks ({counts['helped']} helped, {counts['declined']} declined, "
          f"{counts['no_response']} no response)")
    for note in fit.messages:
        print(f"note: {note}")
    rows = []
    for name in NAMES:
        if name == "decline_aloud" and name not in fit.free:
            continue
        value = getattr(fit.params, name)
        if name in fit.fixed:
            status = "fixed"
        elif name in fit.at_bound:
            status = "at bound"
        else:
            status = "fitted"
        shown = "-" if value is None else f"{value:.4f}"
        rows.append((name, shown, _fmt(fit.std_errors.get(name)), status))
    print(render_table(("constant", "estimate", "std error", ""), rows,
                       (False, True, True, False)))
    print(f"log marginal likelihood {fit.loglik:.3f} ({fit.iterations} iterations)")
    print(verdict_line(fit.verdict))
    if not fit.converged:
        print(f"fit: not converged, no parameter file written: {fit.reason}",
              file=sys.stderr)
        return NOT_CONVERGED
    assert fit.verdict is not None   # converged: a verdict said so
    test = context_test(data, fit, args.notice_probability)
    if (test is not None and test.null_verdict is not None
            and not test.null_verdict.converged):
        print(f"context terms (k = 0): not tested: the fit with k = 0 did not converge "
              f"({test.null_verdict.reason})")
        test = None
    if test is not None:
        print(f"context terms (k = 0): LR statistic {test.statistic:.2f}, df {test.df}, "
              f"p = {test.p_value:.3g} (chi-square); p = {test.p_value_boundary:.3g} "
              "(chi-bar-square: k = 0 lies on the boundary, so the plain chi-square is "
              "conservative)")
        if test.note:
            print(f"note: {test.note}")
    held = None
    if args.folds and args.folds > 1:
        try:
            held = kfold(data, args.folds, args.seed, args.notice_probability,
                         progress=Progress("held-out", enabled=show, every_s=0.0))
        except (FitInputError, ValueError) as exc:
            print(f"held-out: skipped ({exc})")
    if held is not None:
        print(f"\nheld-out log loss, {held.folds}-fold over people ({held.rows} rows, "
              f"help rate {held.base_rate:.3f}):")
        print(render_table(("model", "sequential", "new person", "Brier (sequential)"),
                           [("site model (Beta willingness)", f"{held.site_sequential:.4f}",
                             f"{held.site_new_person:.4f}", f"{held.site_brier:.4f}"),
                            ("site model as the node predicts", f"{held.site_node_sequential:.4f}",
                             "", ""),
                            ("GLMM (random-intercept logit)", f"{held.glmm_sequential:.4f}",
                             f"{held.glmm_new_person:.4f}", f"{held.glmm_brier:.4f}")],
                           (False, True, True, True)))
        for failed in held.unconverged:
            print(f"note: held-out fit not converged, its predictions kept: {failed}")
        print("(the node predicts c E[w]; the site model's own P(help) also carries the "
              f"chance the ask was noticed, {fit.params.noticed:.3f})")
        print("\ncalibration of the site model (sequential predictions):")
        print(render_table(("predicted", "rows", "mean predicted", "observed"),
                           [(f"{lo:.1f}-{hi:.1f}", n, f"{mp:.3f}", f"{ob:.3f}")
                            for lo, hi, n, mp, ob in held.calibration],
                           (False, True, True, True)))
    stamp = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    comments = [f"Written by `helpaware fit` on {stamp}.",
                f"Data: {', '.join(os.path.basename(s) for s in data.sources)} "
                f"({data.n_people} people, {data.n_outcomes} answered asks).",
                f"Log marginal likelihood {fit.loglik:.3f}; {fit.verdict.line()}."]
    written = list(FITTED_NAMES) + ([HALF_LIFE] if HALF_LIFE in fit.free else [])
    for name in written:
        se = fit.std_errors.get(name)
        extra = f" +/- {se:.3g} (1 s.e.)" if se is not None and not math.isnan(se) else \
            f" ({'fixed: ' + fit.fixed[name]})" if name in fit.fixed else " (at bound)" \
            if name in fit.at_bound else ""
        comments.append(f"{name} = {getattr(fit.params, name):.4g}{extra}")
    comments += [f"Note: {n}" for n in fit.messages]
    if test is not None:
        comments.append(f"Context terms: LR {test.statistic:.2f} on {test.df} df, "
                        f"p = {test.p_value:.3g}.")
    if held is not None:
        comments.append(f"Held-out log loss ({held.folds}-fold over people): site model "
                        f"{held.site_sequential:.4f}, GLMM {held.glmm_sequential:.4f}.")
    values = {k: getattr(fit.params, k) for k in written}
    text = render_param_file(values, comments, args.node_name)
    tmp = args.out + ".tmp"
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write(text)
    os.replace(tmp, args.out)
    print(f"\nwrote {args.out}")
    return 0
