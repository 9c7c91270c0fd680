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

"""The review of one bag: report.html (plots embedded), summary.json and decisions.csv.

With another parameter file, every recorded help need is also replayed under it
(counterfactual replay; values the file does not set keep their recorded values).
"""
from __future__ import annotations

import csv
import json
from pathlib import Path
import sys
from typing import Optional


def build(bag: str, out_dir: str, params_file: Optional[str] = None,
          pending_timeout_s: Optional[float] = None, out=sys.stdout) -> dict:
    """Write the report; returns the summary (with 'replay' when params_file is given)."""
    from . import (
        data as review_data,
        html as review_html,
        learning as review_learning,
        plots as review_plots,
        replay as review_replay,
        summary as review_summary,
    )
    data = review_data.load(bag)
    summary = review_summary.summarise(data, pending_timeout_s)
    summary["site_learning"] = review_learning.summarise(data)
    replay = None
    replay_error = None
    if data.decisions:
        other = None
        if params_file:
            from . import documents as review_wire
            from .. import node_param_file as review_params
            try:
                base_model, base_config = review_wire.recorded_params(data.decisions[0].document)
            except review_wire.WireError:   # decisions without their parameters: defaults
                from ..core.model import DecisionConfig, SiteModel
                base_model, base_config = SiteModel(), DecisionConfig()
            other = review_params.load_params(params_file, base_model, base_config)
        try:
            replay = review_replay.replay(data, other.model if other else None,
                                          other.config if other else None,
                                          params_file or "")
        except Exception as exc:  # replay must not cost the rest of the report
            replay_error = f"{type(exc).__name__}: {exc}"
        if replay is not None and other is not None:
            replay["parameters_applied"] = other.applied
            replay["parameters_ignored"] = other.ignored
    summary["replay"] = replay
    summary["replay_error"] = replay_error
    cal = summary["calibration"]
    figures = {
        "timeline": review_plots.timeline(data),
        "willingness": review_plots.willingness(data),
        "reliability": review_plots.reliability(cal["bins"], cal["brier_score"] or float("nan"),
                                                cal["log_loss"] or float("nan"),
                                                cal["answered_asks"]),
        "asks_per_person": review_plots.bars(
            {review_plots.short_key(k): v
             for k, v in list(summary["asks_per_person"].items())[:40]},
            "Asks per person (hashed key)", "person"),
        "asks_per_hour": review_plots.asks_per_hour(data),
    }
    if summary["limits_fired"]["candidates_excluded"]:
        figures["limits"] = review_plots.bars(summary["limits_fired"]["candidates_excluded"],
                                              "Candidates excluded by each limit", "limit")
    learned = summary["site_learning"]
    if learned is not None and learned["revisions_seen"]:
        figures["site_constants"] = review_plots.site_constants(learned["changes"],
                                                                data.start_s, data.end_s)
        figures["reliability_by_source"] = review_plots.reliability_by_source(
            learned["calibration"])
    if replay is not None and len(replay["totals"]) > 1:
        figures["replay"] = review_plots.replay_comparison(replay["totals"])
    show_replay = replay if (replay is not None and params_file) else None
    page = review_html.render(summary, figures, show_replay)
    outp = Path(out_dir)
    outp.mkdir(parents=True, exist_ok=True)
    (outp / "report.html").write_text(page, encoding="utf-8")
    (outp / "summary.json").write_text(json.dumps(summary, indent=1, sort_keys=True,
                                                  default=str), encoding="utf-8")
    with open(outp / "decisions.csv", "w", newline="", encoding="utf-8") as f:
        writer = csv.DictWriter(f, fieldnames=review_summary.CSV_COLUMNS + (
            ["replay_recorded", "replay_other"] if show_replay else []))
        writer.writeheader()
        changed = {c["request_id"]: c for c in (show_replay or {}).get("changes", [])}
        for row in review_summary.decision_rows(data):
            if show_replay:
                c = changed.get(row["request_id"])
                row["replay_recorded"] = c["recorded"] if c else "same"
                row["replay_other"] = c["other"] if c else "same"
            writer.writerow(row)
    return summary


def summary_text(summary: dict, out_dir: str) -> str:
    """Return the summary as the terminal shows it: a few lines, then where the report is."""
    cal = summary["calibration"]
    fmt = lambda v: "n/a" if v is None else f"{v:.3f}"  # noqa: E731
    lines = [f"bag {summary['bag']} ({summary['storage']}): "
             + ", ".join(f"{k} {v}" for k, v in summary["messages"].items()),
             f"{summary['decisions']} decisions: {summary['asks']} asks, "
             f"{summary['continues']} continues; outcomes "
             + (", ".join(f"{k} {v}" for k, v in summary["outcomes"].items()) or "none"),
             f"calibration over {cal['answered_asks']} answered asks: "
             f"Brier {fmt(cal['brier_score'])}, "
             f"log loss {fmt(cal['log_loss'])}",
             f"pending asks expired: {summary['pending_asks']['expired']}"]
    if summary["missing_topics"]:
        lines.append("missing topics (no messages): " + ", ".join(summary["missing_topics"]))
    learned = summary.get("site_learning")
    if learned and learned["revisions_seen"]:
        first = learned["changes"][0]
        last = learned["changes"][-1]
        moved = ", ".join(f"{k} {first[k]:.3g} -> {last[k]:.3g}" for k in
                          ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
                           "ask_memory_half_life_s") if k in first and first[k] != last.get(k))
        lines.append(f"site learning: revisions {', '.join(map(str, learned['revisions_seen']))}"
                     f" in force during the bag ({moved or 'no change'})")
        cal_by = learned["calibration"]
        lines.append("  calibration: " + "; ".join(
            f"{label} {part['answered_asks']} asks, Brier {fmt(part['brier_score'])}"
            for label, part in (("parameter file", cal_by["parameter_file"]),
                                ("learned", cal_by["learned"]))))
    rp = summary.get("replay")
    if rp:
        lines.append(f"replay with recorded parameters: {rp['reproduced']} of {rp['needs']} "
                     "decisions reproduced")
        if rp["params_file"]:
            lines.append(f"with {rp['params_file']}: {rp['changed']} decisions change "
                         "(model-based estimates below)")
            lines.append(f"  {'parameters':<10} {'asks':>5} {'exp. helps':>10} "
                         f"{'exp. interruption s':>20} {'exp. time lost s':>17}")
            for r in rp["totals"]:
                lines.append(f"  {r['label']:<10} {r['asks']:>5} {r['expected_helps']:>10.2f} "
                             f"{r['expected_interruption_s']:>20.1f} "
                             f"{r['expected_time_lost_s']:>17.1f}")
    if summary.get("replay_error"):
        lines.append(f"replay failed: {summary['replay_error']}")
    lines.append(f"report: {Path(out_dir) / 'report.html'}")
    return "\n".join(lines) + "\n"
