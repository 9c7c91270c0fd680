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

"""The review's figures, each rendered to PNG bytes with matplotlib's Agg backend (no display)."""
from __future__ import annotations

from collections import Counter
import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from .metrics import beta_interval  # noqa: E402

RESULT_COLOURS = {"helped": "tab:green", "declined": "tab:red", "no_response": "tab:orange",
                  "could_not_ask": "tab:gray", "expired": "black"}
MAX_PEOPLE_PLOTTED = 12


def short_key(key: str) -> str:
    return key[:8] if key else "?"


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90)
    plt.close(fig)
    return buf.getvalue()


def _hours(t_s, t0_s):
    return (np.asarray(t_s, dtype=float) - t0_s) / 3600.0


def timeline(data) -> bytes:
    """Help needs, asks, continues and outcomes against time since the bag started."""
    fig, ax = plt.subplots(layout="constrained", figsize=(10, 3.2))
    t0 = data.start_s
    rows = {"help needs": 3, "continue": 2, "ask": 1, "outcome": 0}
    needs = [n.time_s for n in data.needs if n.state == "open"]
    ax.scatter(_hours(needs, t0), np.full(len(needs), rows["help needs"]), marker="|", s=200,
               color="tab:blue", label="help need opened")
    cont = [d.time_s for d in data.decisions if d.action == "continue"]
    asks = [d.time_s for d in data.decisions if d.action == "ask"]
    ax.scatter(_hours(cont, t0), np.full(len(cont), rows["continue"]), marker="s", s=25,
               color="tab:gray", label="continue")
    ax.scatter(_hours(asks, t0), np.full(len(asks), rows["ask"]), marker="^", s=40,
               color="tab:purple", label="ask")
    for result, colour in RESULT_COLOURS.items():
        ts = [o.time_s for o in data.outcomes if o.result == result]
        if result == "expired":
            ts = [a.time_s for a in data.expired_asks]
        if ts:
            ax.scatter(_hours(ts, t0), np.full(len(ts), rows["outcome"]), marker="o", s=30,
                       color=colour, label=result)
    ax.set_yticks(list(rows.values()), list(rows.keys()))
    ax.set_ylim(-0.7, 3.7)
    ax.set_xlabel("hours since the bag started")
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=8)
    ax.set_title("Decision timeline")
    return _png(fig)


def willingness(data) -> bytes:
    """Mean and 90 % interval of each person's Beta belief at each decision they were in."""
    series = data.belief_series()
    keys = sorted(series, key=lambda k: -len(series[k]))[:MAX_PEOPLE_PLOTTED]
    fig, ax = plt.subplots(layout="constrained", figsize=(10, 4))
    for key in sorted(keys):
        pts = sorted(series[key])
        t = _hours([p[0] for p in pts], data.start_s)
        a = np.array([p[1] for p in pts])
        b = np.array([p[2] for p in pts])
        lo, hi = beta_interval(a, b, 0.9)
        line, = ax.plot(t, a / (a + b), marker=".", label=short_key(key))
        ax.fill_between(t, lo, hi, color=line.get_color(), alpha=0.25 / max(1, len(keys)) ** 0.5)
    ax.set_ylim(0, 1)
    ax.set_xlabel("hours since the bag started")
    ax.set_ylabel("willingness (mean, 90 % interval)")
    title = "Willingness per person (hashed key, first 8 hex digits)"
    if len(series) > len(keys):
        title += f"; {len(keys)} of {len(series)} people shown"
    ax.set_title(title)
    if keys:
        ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=8)
    return _png(fig)


def reliability(bins: list[dict], brier: float, logloss: float, n: int) -> bytes:
    fig, ax = plt.subplots(layout="constrained", figsize=(5, 5))
    ax.plot([0, 1], [0, 1], color="gray", linestyle="--", label="perfect calibration")
    if bins:
        x = [r["mean_predicted"] for r in bins]
        y = [r["observed_rate"] for r in bins]
        sizes = [20 + 10 * r["count"] for r in bins]
        ax.plot(x, y, color="tab:blue")
        ax.scatter(x, y, s=sizes, color="tab:blue", label="observed help rate (size: count)")
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("predicted help probability p")
    ax.set_ylabel("fraction helped")
    ax.set_title(f"Calibration, {n} answered asks\nBrier {brier:.3f}, log loss {logloss:.3f}")
    ax.legend(loc="upper left", fontsize=8)
    return _png(fig)


def bars(counts: dict, title: str, xlabel: str, rotate: bool = True) -> bytes:
    fig, ax = plt.subplots(layout="constrained", figsize=(8, 3.2))
    labels = list(counts.keys())
    ax.bar(range(len(labels)), list(counts.values()), color="tab:blue")
    ax.set_xticks(range(len(labels)), labels, rotation=60 if rotate else 0, ha="right"
                  if rotate else "center", fontsize=8)
    ax.set_xlabel(xlabel)
    ax.set_ylabel("count")
    ax.set_title(title)
    return _png(fig)


def asks_per_hour(data) -> bytes:
    hours = Counter(int((d.time_s - data.start_s) // 3600) for d in data.decisions
                    if d.action == "ask")
    span = int((data.end_s - data.start_s) // 3600) + 1
    return bars({str(h): hours.get(h, 0) for h in range(span)}, "Asks per hour",
                "hour since the bag started", rotate=False)


def replay_comparison(rows: list[dict]) -> bytes:
    """Plot expected asks, helps and interruption cost by parameter set (model estimates)."""
    fig, axes = plt.subplots(1, 3, figsize=(10, 3))
    for ax, field, label in zip(axes, ("asks", "expected_helps", "expected_interruption_s"),
                                ("asks", "expected helps", "expected interruption (robot-s)")):
        ax.bar([r["label"] for r in rows], [r[field] for r in rows],
               color=["tab:blue", "tab:orange"][:len(rows)])
        ax.set_title(label, fontsize=9)
    fig.suptitle("Counterfactual replay (model-based estimates)")
    return _png(fig)


def site_constants(changes: list[dict], start_s: float, end_s: float) -> bytes:
    """Each site constant in force over time (steps at each change; learned revisions marked)."""
    names = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
             "ask_memory_half_life_s")
    fig, axes = plt.subplots(2, 3, layout="constrained", figsize=(10, 4.6), sharex=True)
    end_h = max(_hours([end_s], start_s)[0], 1e-3)
    for ax, name in zip(axes.flat, names):
        pts = [(c["time_s"], c[name]) for c in changes if name in c]
        if not pts:
            ax.set_visible(False)
            continue
        scale = 1.0 / 60.0 if name == "ask_memory_half_life_s" else 1.0   # shown in minutes
        t = list(_hours([p[0] for p in pts], start_s)) + [end_h]
        v = [p[1] * scale for p in pts] + [pts[-1][1] * scale]
        ax.step(t, v, where="post", color="tab:blue")
        learned = [(h, c[name] * scale) for h, c in zip(t, changes) if c["source"] == "learned"]
        if learned:
            ax.scatter([p[0] for p in learned], [p[1] for p in learned], color="tab:orange",
                       s=18, zorder=3, label="learned revision")
        ax.set_title("ask memory half-life (min)" if scale != 1.0 else name, fontsize=9)
    for ax in axes[-1]:
        ax.set_xlabel("hours since the bag started")
    handles, labels = axes.flat[0].get_legend_handles_labels()
    if handles:
        fig.legend(handles, labels, loc="upper right", fontsize=8)
    fig.suptitle("Site constants in force (parameter file, then site learning)")
    return _png(fig)


def reliability_by_source(calibration: dict) -> bytes:
    """Calibration of asks made under the parameter file's constants and under learned ones."""
    fig, ax = plt.subplots(layout="constrained", figsize=(5, 5))
    ax.plot([0, 1], [0, 1], color="gray", linestyle="--", label="perfect calibration")
    for key, colour, label in (("parameter_file", "tab:gray", "parameter file"),
                               ("learned", "tab:orange", "learned")):
        part = calibration.get(key) or {}
        bins = part.get("bins") or []
        if bins:
            x = [r["mean_predicted"] for r in bins]
            y = [r["observed_rate"] for r in bins]
            ax.plot(x, y, color=colour)
            brier = part.get("brier_score")
            ax.scatter(x, y, s=[20 + 10 * r["count"] for r in bins], color=colour,
                       label=f"{label}: {part['answered_asks']} asks, Brier "
                       + ("n/a" if brier is None else f"{brier:.3f}"))
    ax.set_xlim(0, 1)
    ax.set_ylim(0, 1)
    ax.set_xlabel("predicted help probability p")
    ax.set_ylabel("fraction helped")
    ax.set_title("Calibration before and after site learning")
    ax.legend(loc="upper left", fontsize=8)
    return _png(fig)
