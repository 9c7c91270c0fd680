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

"""Fit time, peak memory and held-out log loss.

The site model beside statsmodels' variational binomial mixed GLM (BinomialBayesMixedGLM.fit_vb)
and our own AGQ GLMM, on the same data.

Data: simulated from the site model (default 10 000 people, about 200 000 answered asks);
people are split 80/20 into training and held-out sets; held-out rows are predicted from the
fitted constants and each person's earlier rows.  Memory is the tracemalloc peak (numpy
buffers included).  Usage: bench/bench_fit.py [--people N] [--asks-per-person M] [--seed S]
"""
from __future__ import annotations

import argparse
import math
import platform
import sys
import time
import tracemalloc

from helpaware_node.fit.data import HELPED
from helpaware_node.fit.glmm import RandomInterceptLogit, sequential_help_probability
from helpaware_node.fit.heldout import glmm_design, log_loss
from helpaware_node.fit.progress import Progress
from helpaware_node.fit.simulate_outcomes import simulate
from helpaware_node.fit.site_fit import fit_site
from helpaware_node.fit.site_likelihood import SiteLikelihood, SiteParams
from helpaware_node.text_table import render_table
import numpy as np
from scipy import sparse

TRUTH = SiteParams(2.0, 3.0, 1.5, 0.7, 0.6, 0.7)


def measured(fn):
    tracemalloc.start()
    t0 = time.perf_counter()
    out = fn()
    dt = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return out, dt, peak / 2**20


def fit_statsmodels(train, method: str = "L-BFGS-B"):
    from statsmodels.genmod.bayes_mixed_glm import BinomialBayesMixedGLM
    y = (train.result == HELPED).astype(float)
    exog_vc = sparse.csr_matrix((np.ones(train.n_outcomes),
                                 (np.arange(train.n_outcomes), train.person)),
                                shape=(train.n_outcomes, train.n_people))
    model = BinomialBayesMixedGLM(y, glmm_design(train), exog_vc, np.zeros(train.n_people, int),
                                  fep_names=["const", "busyness",
                                             "ask_load"], vcp_names=["person"])
    # statsmodels' default optimiser is BFGS, whose dense inverse Hessian over every random
    # effect's mean and sd (2 * people + 4 values) dominates its memory on this size
    return model.fit_vb(fit_method=method)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--people", type=int, default=10000)
    ap.add_argument("--asks-per-person", type=float, default=20.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--skip-statsmodels", action="store_true")
    ap.add_argument("--statsmodels-method", default="L-BFGS-B",
                    help="fit_vb's fit_method (default L-BFGS-B: statsmodels' own default, "
                    "BFGS, holds a dense inverse Hessian over 2 x people values, about 10 GB "
                    "and over 20 minutes at 10 000 people)")
    args = ap.parse_args(argv)
    data = simulate(TRUTH, args.people, args.asks_per_person, seed=args.seed)
    rng = np.random.default_rng(args.seed)
    held_people = rng.permutation(data.n_people)[: max(1, data.n_people // 5)]
    train = data.subset_people(np.setdiff1d(np.arange(data.n_people), held_people))
    test = data.subset_people(held_people)
    y_test = (test.result == HELPED).astype(float)
    print(f"python {platform.python_version()} on {platform.machine()}; {data.n_people} people, "
          f"{data.n_outcomes} answered asks; training {train.n_outcomes} rows, held out "
          f"{test.n_outcomes} rows of {test.n_people} people")

    rows = []
    site, t_site, m_site = measured(lambda: fit_site(
        train, progress=Progress("site fit", enabled=True), standard_errors=False))
    p_site = site.params.noticed * SiteLikelihood(test).sequential_help_probability(site.params)
    ll_site = log_loss(p_site, y_test)
    rows.append(["site model (Gauss-Jacobi ML)", t_site, m_site, ll_site])
    print(f"site model: {site.params}", file=sys.stderr)

    ytr = (train.result == HELPED).astype(float)
    glmm, t_g, m_g = measured(lambda: RandomInterceptLogit(
        ytr, np.ones_like(ytr), glmm_design(train), train.person, nodes=15).fit(
            progress=Progress("glmm fit", enabled=True), standard_errors=False))
    p_g = sequential_help_probability(glmm.beta, glmm.sigma, glmm_design(test), test.person,
                                      y_test)
    rows.append(["GLMM, adaptive Gauss-Hermite (ours)", t_g, m_g, log_loss(p_g, y_test)])

    if not args.skip_statsmodels:
        try:
            sm, t_sm, m_sm = measured(lambda: fit_statsmodels(train, args.statsmodels_method))
        except ImportError:
            print("statsmodels is not installed: pip install statsmodels", file=sys.stderr)
            sm = None
        if sm is not None:
            beta, sigma = np.asarray(sm.fe_mean), float(math.exp(sm.vcp_mean[0]))
            p_sm = sequential_help_probability(beta, sigma, glmm_design(test), test.person, y_test)
            rows.append([f"statsmodels BinomialBayesMixedGLM.fit_vb ({args.statsmodels_method})",
                         t_sm, m_sm,
                         log_loss(p_sm, y_test)])
    base = log_loss(np.full(y_test.size, ytr.mean()), y_test)
    ref = rows[-1]
    # three significant figures: a time ratio of 0.01 would hide a factor of two either way
    table = [[name, f"{t:.2f}", f"{m:.0f}", f"{ll:.4f}", f"{t / ref[1]:.3g}", f"{m / ref[2]:.2f}",
              f"{ll / ref[3]:.4f}"] for name, t, m, ll in rows]
    table.append(["constant help rate (floor)", "", "", f"{base:.4f}", "", "", ""])
    print(f"ratios are to the last model row ({ref[0]})")
    print(render_table(("model", "fit s", "peak MiB", "held-out log loss",
                        "time ratio", "memory ratio", "log-loss ratio"),
                       table, (False, True, True, True, True, True, True)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
