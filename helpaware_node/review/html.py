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

"""One self-contained HTML page: text, tables and PNG figures embedded as base64 data URIs."""
from __future__ import annotations

import base64
import html
import json
import math
import shlex
from typing import Optional

STYLE = """
body { font-family: sans-serif; max-width: 1100px; margin: 1em auto; color: #222; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; border-bottom: 1px solid #ccc; }
table { border-collapse: collapse; margin: 0.5em 0; font-size: 0.9em; }
td, th { border: 1px solid #ccc; padding: 2px 8px; text-align: left; }
td.n { text-align: right; font-variant-numeric: tabular-nums; }
.warn { background: #fff3cd; border: 1px solid #e0c060; padding: 0.5em; }
.note { color: #555; font-size: 0.9em; }
img { max-width: 100%; }
pre { background: #f6f6f6; padding: 0.5em; overflow-x: auto; font-size: 0.85em; }
"""


def esc(value) -> str:
    return html.escape(str(value), quote=True)


def image(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return f'<img alt="{esc(alt)}" src="data:image/png;base64,{data}">'


def table(headers, rows) -> str:
    head = "".join(f"<th>{esc(h)}</th>" for h in headers)
    body = []
    for row in rows:
        cells = []
        for v in row:
            cls = ' class="n"' if isinstance(v, (int, float)) and not isinstance(v, bool) else ""
            text = f"{v:.4g}" if isinstance(v, float) else v
            cells.append(f"<td{cls}>{esc(text)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def duration_text(seconds: float) -> str:
    """Return a time span as people read it: `7 h 28 min`, `12 min 5 s`, `42.0 s`."""
    if not math.isfinite(seconds) or seconds < 0:
        return "n/a"
    if seconds < 60:
        return f"{seconds:.1f} s"
    minutes = int(round(seconds / 60.0)) if seconds >= 3600 else int(seconds // 60)
    if seconds < 3600:
        return f"{minutes} min {int(seconds - 60 * minutes)} s"
    days, minutes = divmod(minutes, 24 * 60)
    text = f"{minutes // 60} h {minutes % 60} min"
    return f"{days} d {text}" if days else text


# Fewer answered asks than this and the overall gap says little (common practice, no source).
MIN_ASKS_TO_JUDGE = 20


def calibration_gap(bins: list[dict]) -> dict:
    """Calibration in the large from the bins.

    Asks, mean predicted p, observed help rate, and the standard error of their difference. The
    error uses each bin's mean p, which bounds the exact binomial error sum p(1-p) from above
    (p(1-p) is concave), so a gap called larger than chance is one.
    """
    n = sum(b["count"] for b in bins)
    if not n:
        return {"asks": 0}
    predicted = sum(b["count"] * b["mean_predicted"] for b in bins) / n
    observed = sum(b["count"] * b["observed_rate"] for b in bins) / n
    var = sum(b["count"] * b["mean_predicted"] * (1.0 - b["mean_predicted"]) for b in bins)
    return {"asks": n, "predicted": predicted, "observed": observed,
            "gap": observed - predicted, "standard_error": math.sqrt(var) / n}


def calibration_advice(bag: str, bins: list[dict]) -> str:
    """Return what the calibration section says to do, with the commands to do it on this bag."""
    g = calibration_gap(bins)
    if not g["asks"]:
        return "<p>No answered asks in this bag: nothing to compare predictions with.</p>"
    rates = (f"mean predicted p {g['predicted']:.2f}, observed help rate {g['observed']:.2f} "
             f"over {g['asks']} answered asks")
    if g["asks"] < MIN_ASKS_TO_JUDGE:
        verdict = (f"<p>{rates}: too few asks to judge (fewer than {MIN_ASKS_TO_JUDGE}). "
                   "Record longer, or pass several bags to the fit below.</p>")
    elif abs(g["gap"]) <= 2.0 * g["standard_error"]:
        verdict = (f"<p>{rates}: the gap ({100 * g['gap']:+.0f} points) is within twice its "
                   f"standard error ({100 * g['standard_error']:.0f} points), as chance "
                   "allows. Nothing to change; refitting below is optional.</p>")
    else:
        direction = ("expects more help than people give" if g["gap"] < 0
                     else "expects less help than people give")
        verdict = (f'<p class="warn">{rates}: the model {direction} (gap '
                   f"{100 * g['gap']:+.0f} points, more than twice its standard error of "
                   f"{100 * g['standard_error']:.0f} points). The site constants (prior_a, "
                   "prior_b, k_busy, k_load, notice_probability) do not fit this site: fit "
                   "them from this bag and replay it under the result.</p>")
    base = bag.rstrip("/\\")
    tuned_review = f"{base}_review_tuned"
    commands = "\n".join([
        f"helpaware fit {shlex.quote(bag)} --out tuned.yaml",
        f"helpaware review {shlex.quote(bag)} --params tuned.yaml --out "
        f"{shlex.quote(tuned_review)}"])
    return (verdict + "<p>To fit and compare (in a ROS 2 workspace, start each with "
            "<code>ros2 run helpaware_node helpaware</code> instead of "
            "<code>helpaware</code>):</p>"
            f"<pre>{esc(commands)}</pre>"
            '<p class="note">The replay shows which decisions would change under tuned.yaml. '
            "If they are the ones you want, start the node with it: "
            "<code>--params-file tuned.yaml</code>, or "
            "<code>params_file:=/full/path/tuned.yaml</code> with the launch file "
            "(docs/fit.md).</p>")


def render(summary: dict, figures: dict[str, bytes], replay: Optional[dict] = None) -> str:
    s = summary
    parts = [f'<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
             f"<title>helpaware review: {esc(s['bag'])}</title><style>{STYLE}</style>"
             "</head><body>",
             f"<h1>Review of {esc(s['bag'])}</h1>"]
    if s["read_error"]:
        parts.append(f'<p class="warn">Partial report: the bag could not be read to its end. '
                     f'{esc(s["read_error"])}</p>')
    if s["missing_topics"]:
        parts.append(f'<p class="warn">Topics missing or empty in this bag: '
                     f'{esc(", ".join(s["missing_topics"]))}. '
                     "Sections built from them are empty.</p>")
    if s["documents_not_understood"]:
        parts.append('<p class="warn">Documents not understood (skipped): ' + esc(", ".join(
            f"{k}: {v} (e.g. {s['documents_not_understood_examples'].get(k, '')})"
            for k, v in s["documents_not_understood"].items())) + "</p>")
    cal = s["calibration"]
    parts.append("<h2>Summary</h2>" + table(["quantity", "value"], [
        ["storage", s["storage"]],
        ["time span", duration_text(float(s["duration_s"]))],
        ["help needs", ", ".join(f"{k} {v}" for k, v in s["help_needs"].items()) or "none"],
        ["decisions", s["decisions"]], ["asks", s["asks"]], ["continues", s["continues"]],
        ["outcomes", ", ".join(f"{k} {v}" for k, v in s["outcomes"].items()) or "none"],
        ["answered asks scored", cal["answered_asks"]],
        ["Brier score", "n/a" if cal["brier_score"] is None else cal["brier_score"]],
        ["log loss", "n/a" if cal["log_loss"] is None else cal["log_loss"]],
        ["pending asks expired", s["pending_asks"]["expired"]],
        ["person ids in bag", s["person_ids"]],
    ]))
    parts.append("<h3>Messages per topic</h3>" + table(
        ["topic", "name in bag", "messages"],
        [[k, s["topics"].get(k, ""), v] for k, v in s["messages"].items()]))
    parts.append("<h2>Decision timeline</h2>" + image(figures["timeline"], "decision timeline"))
    parts.append('<h2>Willingness per person</h2><p class="note">Belief at each decision the '
                 "person was a candidate in (mean and central 90 % interval of the Beta). Keys "
                 "are hashed ids. A willingness estimate describes past responses to a robot; "
                 "it must not be used to judge or evaluate people.</p>"
                 + image(figures["willingness"], "willingness per person"))
    parts.append('<h2>Calibration</h2><p class="note">Predicted help probability p of the '
                 "person asked against whether they helped (declined and no response count as "
                 "not helped; could-not-ask is left out).</p>"
                 + image(figures["reliability"], "reliability diagram")
                 + table(["bin", "count", "mean predicted", "observed rate", "gap"],
                         [[f"{b['bin_low']:.1f}-{b['bin_high']:.1f}", b["count"],
                           b["mean_predicted"], b["observed_rate"],
                           f"{b['observed_rate'] - b['mean_predicted']:+.2f}"]
                          for b in cal["bins"]])
                 + calibration_advice(s["bag"], cal["bins"]))
    learned = s.get("site_learning")
    if learned and "site_constants" in figures:
        parts.append(render_site_learning(learned, figures))
    parts.append("<h2>Asks per person and per hour</h2>"
                 + image(figures["asks_per_person"], "asks per person")
                 + image(figures["asks_per_hour"], "asks per hour"))
    lim = s["limits_fired"]
    parts.append("<h2>Limits that fired</h2>" + table(
        ["limit", "candidates excluded", "decisions where it applied"],
        [[k, v, lim["decisions_with_limit"].get(k, 0)]
         for k, v in lim["candidates_excluded"].items()]))
    if "limits" in figures:
        parts.append(image(figures["limits"], "limits that fired"))
    pend = s["pending_asks"]
    parts.append(f"<h2>Pending asks</h2><p>{pend['expired']} asks had no outcome within "
                 f"{pend['timeout_s']:g} s (expired); {pend['still_pending_at_end']} were still "
                 f"pending when the bag ended.</p>")
    if pend["expired_request_ids"]:
        expired = ", ".join(pend["expired_request_ids"][:50])
        parts.append('<p class="note">Expired: ' + esc(expired) + "</p>")
    par = s["parameters"]
    parts.append("<h2>Parameters in force</h2>" + table(
        ["parameter hash", "decisions"], [[h, n] for h, n in par["hashes"].items()]))
    for h, values in par["in_force"].items():
        text = json.dumps(values, indent=1, sort_keys=True)
        parts.append(f"<h3>{esc(h)}</h3><pre>{esc(text)}</pre>")
    if replay is not None:
        parts.append(render_replay(replay, figures.get("replay")))
    parts.append('<h2>Cautions</h2><p class="note">The node only decides whether to ask; it '
                 "never moves the robot. Sites must follow their own safety, privacy and labour "
                 "rules; keep a human operator able to disable asking.</p></body></html>")
    return "\n".join(parts)


def render_site_learning(learned: dict, figures: dict[str, bytes]) -> str:
    """Constants over time, each revision's values, calibration before and after."""
    names = ("prior_a", "prior_b", "k_busy", "k_load", "notice_probability",
             "ask_memory_half_life_s")
    parts = ['<h2>Site learning</h2><p class="note">The site constants each decision was '
             "made with (its document's parameters and their source). The node refits them from "
             "its store's outcomes (site_learning: apply); costs and hard limits never change "
             'this way (docs/fit.md, "Site learning").</p>',
             image(figures["site_constants"], "site constants over time"),
             table(["from (h)", "source", "revision"] + list(names),
                   [[round((c["time_s"] - learned["changes"][0]["time_s"]) / 3600.0, 2),
                     c["source"], c["revision"]] + [c.get(n, "") for n in names]
                    for c in learned["changes"]])]
    cal = learned["calibration"]
    parts.append('<h3>Calibration before and after</h3><p class="note">Each answered ask '
                 "scored with the p its own decision predicted, split by the constants in "
                 "force when it was made. The two groups are different asks at different "
                 "times (later asks also know more about each person), so read the gap as a "
                 "check, not a controlled comparison.</p>"
                 + image(figures["reliability_by_source"], "calibration by source")
                 + table(["constants", "answered asks", "mean predicted", "observed rate",
                          "Brier", "log loss"],
                         [[label, part["answered_asks"],
                           "n/a" if part["mean_predicted"] is None else part["mean_predicted"],
                           "n/a" if part["observed_rate"] is None else part["observed_rate"],
                           "n/a" if part["brier_score"] is None else part["brier_score"],
                           "n/a" if part["log_loss"] is None else part["log_loss"]]
                          for label, part in (("parameter file", cal["parameter_file"]),
                                              ("learned", cal["learned"]))]))
    return "\n".join(parts)


def render_replay(replay: dict, figure: Optional[bytes]) -> str:
    parts = ["<h2>Counterfactual replay</h2>",
             '<p class="warn">These are model-based estimates, not observations: the outcomes of '
             "people who were not asked are unknown, so expected helps and costs use each "
             "candidate's predicted help probability p under the recorded beliefs.</p>"]
    parts.append(f"<p>Other parameters: {esc(replay['params_file'])} (hash "
                 f"{esc(replay['other_hash'])}). {replay['needs']} help needs replayed; "
                 f"{replay['changed']} decisions change; {replay['reproduced']} of "
                 f"{replay['needs']} recorded decisions reproduced with the recorded "
                 "parameters.</p>")
    parts.append(table(["parameter set", "asks", "expected helps",
                        "expected interruption (robot-s)",
                        "expected time lost (robot-s)"],
                       [[r["label"], r["asks"], r["expected_helps"], r["expected_interruption_s"],
                         r["expected_time_lost_s"]] for r in replay["totals"]]))
    if figure:
        parts.append(image(figure, "counterfactual replay"))
    if replay["changes"]:
        parts.append("<h3>Decisions that change</h3>" + table(
            ["request", "recorded", "with other parameters"],
            [[c["request_id"], c["recorded"], c["other"]] for c in replay["changes"][:200]]))
    return "\n".join(parts)
