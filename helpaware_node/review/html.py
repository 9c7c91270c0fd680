"""One self-contained HTML page: text, tables and PNG figures embedded as base64 data URIs."""
from __future__ import annotations

import base64
import html
import json
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


def render(summary: dict, figures: dict[str, bytes], replay: Optional[dict] = None) -> str:
    s = summary
    parts = [f"<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
             f"<title>helpaware review: {esc(s['bag'])}</title><style>{STYLE}</style></head><body>",
             f"<h1>Review of {esc(s['bag'])}</h1>"]
    if s["read_error"]:
        parts.append(f'<p class="warn">Partial report: the bag could not be read to its end. '
                     f'{esc(s["read_error"])}</p>')
    if s["missing_topics"]:
        parts.append(f'<p class="warn">Topics missing or empty in this bag: '
                     f'{esc(", ".join(s["missing_topics"]))}. Sections built from them are empty.</p>')
    if s["documents_not_understood"]:
        parts.append('<p class="warn">Documents not understood (skipped): ' + esc(", ".join(
            f"{k}: {v} (e.g. {s['documents_not_understood_examples'].get(k, '')})"
            for k, v in s["documents_not_understood"].items())) + "</p>")
    cal = s["calibration"]
    parts.append("<h2>Summary</h2>" + table(["quantity", "value"], [
        ["storage", s["storage"]],
        ["time span (s)", float(s["duration_s"])],
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
    parts.append("<h2>Willingness per person</h2><p class=\"note\">Belief at each decision the "
                 "person was a candidate in (mean and central 90 % interval of the Beta). Keys "
                 "are hashed ids. A willingness estimate describes past responses to a robot; "
                 "it must not be used to judge or evaluate people.</p>"
                 + image(figures["willingness"], "willingness per person"))
    parts.append("<h2>Calibration</h2><p class=\"note\">Predicted help probability p of the "
                 "person asked against whether they helped (declined and no response count as "
                 "not helped; could-not-ask is left out).</p>"
                 + image(figures["reliability"], "reliability diagram")
                 + table(["bin", "count", "mean predicted", "observed rate"],
                         [[f"{b['bin_low']:.1f}-{b['bin_high']:.1f}", b["count"],
                           b["mean_predicted"], b["observed_rate"]] for b in cal["bins"]]))
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
        parts.append("<p class=\"note\">Expired: " + esc(", ".join(pend["expired_request_ids"][:50]))
                     + "</p>")
    par = s["parameters"]
    parts.append("<h2>Parameters in force</h2>" + table(
        ["parameter hash", "decisions"], [[h, n] for h, n in par["hashes"].items()]))
    for h, values in par["in_force"].items():
        parts.append(f"<h3>{esc(h)}</h3><pre>{esc(json.dumps(values, indent=1, sort_keys=True))}</pre>")
    if replay is not None:
        parts.append(render_replay(replay, figures.get("replay")))
    parts.append("<h2>Cautions</h2><p class=\"note\">The node only decides whether to ask; it "
                 "never moves the robot. Sites must follow their own safety, privacy and labour "
                 "rules; keep a human operator able to disable asking.</p></body></html>")
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
    parts.append(table(["parameter set", "asks", "expected helps", "expected interruption (robot-s)",
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
