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

"""review: counts against an independent read of the bag, HTML and PNGs.

Damaged and partial bags.
"""
import base64
from collections import Counter
from html.parser import HTMLParser
import json
import os
import re
import subprocess
import sys

from helpaware_node.bag import typestore
from helpaware_node.review import report as review
from helpaware_node.review.sample import write_sample_bag
import pytest
from rosbags.rosbag2 import Reader

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def sample(tmp_path_factory):
    root = tmp_path_factory.mktemp("review")
    bag = root / "shift"
    written = write_sample_bag(str(bag), needs=50, people=10, seed=11, answer_every=4)
    out = root / "report"
    summary = review.build(str(bag), str(out))
    return bag, out, summary, written


def independent_counts(bag):
    """Count straight from the rosbags reader and its typestore deserialiser."""
    store = typestore()
    topics, actions, results, states = Counter(), Counter(), Counter(), Counter()
    with Reader(bag) as reader:
        for conn, _, raw in reader.messages():
            name = conn.topic.rsplit("/", 1)[-1]
            topics[name] += 1
            if conn.msgtype != "std_msgs/msg/String":
                continue
            doc = json.loads(store.deserialize_cdr(raw, conn.msgtype).data)
            if name == "decision":
                actions[doc["action"]] += 1
            elif name == "outcome":
                results[doc["result"]] += 1
            elif name == "task_status":
                states[doc["state"]] += 1
    return topics, actions, results, states


def test_summary_counts_equal_an_independent_read(sample):
    bag, out, summary, written = sample
    topics, actions, results, states = independent_counts(bag)
    on_disk = json.loads((out / "summary.json").read_text())
    assert on_disk["messages"] == dict(topics)
    assert on_disk["asks"] == actions["ask"] and on_disk["continues"] == actions["continue"]
    assert on_disk["decisions"] == sum(actions.values()) == written.decisions
    assert on_disk["outcomes"] == dict(results)
    assert on_disk["help_needs"] == dict(states)
    assert on_disk["missing_topics"] == [] and on_disk["complete"]
    # every 4th ask got no outcome: those (older than the timeout at the bag's end) expired
    unanswered = actions["ask"] - sum(results.values())
    pend = on_disk["pending_asks"]
    assert pend["expired"] + pend["still_pending_at_end"] == unanswered > 0
    rows = (out / "decisions.csv").read_text().splitlines()
    assert len(rows) == 1 + written.decisions
    assert sum(1 for r in rows[1:] if ",expired" in r) == pend["expired"]


def test_calibration_uses_only_answered_asks(sample):
    _, _, summary, _ = sample
    cal = summary["calibration"]
    answered = sum(v for k, v in summary["outcomes"].items() if k != "could_not_ask")
    assert cal["answered_asks"] == answered
    assert sum(b["count"] for b in cal["bins"]) == answered
    assert 0.0 <= cal["brier_score"] <= 1.0 and cal["log_loss"] > 0.0


class _Collect(HTMLParser):

    def __init__(self):
        super().__init__()
        self.images, self.headings, self.tags = [], [], Counter()
        self._in_h2 = False

    def handle_starttag(self, tag, attrs):
        self.tags[tag] += 1
        if tag == "img":
            self.images.append(dict(attrs)["src"])
        self._in_h2 = tag == "h2"

    def handle_data(self, data):
        if self._in_h2:
            self.headings.append(data.strip())
            self._in_h2 = False


def test_html_parses_and_every_image_is_a_png(sample):
    import io

    import matplotlib.image as mpimg
    _, out, _, _ = sample
    parser = _Collect()
    parser.feed((out / "report.html").read_text())
    parser.close()
    for h in ("Decision timeline", "Willingness per person", "Calibration", "Limits that fired",
              "Pending asks", "Parameters in force"):
        assert h in parser.headings
    assert len(parser.images) >= 5
    for src in parser.images:
        assert src.startswith("data:image/png;base64,")   # self-contained: nothing fetched
        png = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert png.startswith(PNG_SIGNATURE)
        pixels = mpimg.imread(io.BytesIO(png), format="png")
        assert pixels.shape[0] > 50 and pixels.shape[1] > 50


@pytest.mark.skipif(not os.path.exists("/usr/bin/chromium"), reason="no /usr/bin/chromium")
def test_report_renders_in_headless_chromium(sample, tmp_path):
    _, out, _, _ = sample
    shot = tmp_path / "shot.png"
    subprocess.run(["/usr/bin/chromium", "--headless", "--no-sandbox", "--disable-gpu",
                    f"--screenshot={shot}", "--window-size=1200,3000",
                    (out / "report.html").as_uri()], check=True, timeout=120,
                   capture_output=True)
    assert shot.read_bytes().startswith(PNG_SIGNATURE)


def test_bag_without_some_topics_says_which(tmp_path):
    bag = tmp_path / "thin"
    write_sample_bag(str(bag), needs=8, topics=("decision", "task_status"))
    summary = review.build(str(bag), str(tmp_path / "out"))
    assert summary["missing_topics"] == ["people", "outcome", "markers", "diagnostics"]
    html = (tmp_path / "out" / "report.html").read_text()
    assert "Topics missing or empty in this bag: people, outcome, markers, diagnostics" in html
    assert summary["decisions"] == 8 and summary["calibration"]["answered_asks"] == 0


def test_truncated_bag_gives_partial_report_and_clear_error(tmp_path):
    bag = tmp_path / "long"
    # enough people padding that the bag spans several 1 MiB MCAP chunks
    write_sample_bag(str(bag), needs=60, extra_people_messages=30000)
    mcap = next(bag.glob("*.mcap"))
    data = mcap.read_bytes()
    mcap.write_bytes(data[: int(len(data) * 0.6)])
    out = tmp_path / "out"
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "review", str(bag),
                           "--out", str(out)], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 3, proc.stderr
    assert str(mcap) in proc.stderr and "messages read" in proc.stderr
    summary = json.loads((out / "summary.json").read_text())
    assert not summary["complete"]
    assert 0 < summary["decisions"] < 60
    m = re.search(r"(\d+) messages read", summary["read_error"])
    assert int(m.group(1)) == sum(summary["messages"].values())
    assert "Partial report" in (out / "report.html").read_text()


def test_not_a_bag_exits_with_the_file_named(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "review",
                           str(tmp_path / "absent"), "--out", str(tmp_path / "o")],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2 and str(tmp_path / "absent") in proc.stderr


@pytest.mark.parametrize("plugin", ["sqlite3", "mcap"])
def test_a_bag_in_the_ros2_recorder_layout_reviews_the_same(sample, tmp_path, plugin):
    # the sample bag copied message by message into what `ros2 bag record` writes: another
    # storage, format version 8, namespaced topic names
    from rosbags.rosbag2 import Writer
    from rosbags.rosbag2.enums import StoragePlugin
    bag, _, summary, _ = sample
    copy = tmp_path / "recorded"
    store = typestore()
    with Reader(bag) as reader, Writer(copy, version=8,
                                       storage_plugin=StoragePlugin[plugin.upper()]) as w:
        conns = {}
        for c in reader.connections:
            name = c.topic if c.topic == "/diagnostics" else "/robot1" + c.topic
            conns[c.id] = w.add_connection(name, c.msgtype, typestore=store)
        for c, t, raw in reader.messages():
            w.write(conns[c.id], t, raw)
    again = review.build(str(copy), str(tmp_path / "out"))
    for key in ("messages", "decisions", "asks", "outcomes", "help_needs", "calibration",
                "asks_per_person", "limits_fired", "pending_asks", "people"):
        assert again[key] == summary[key], key
    assert again["storage"] == plugin and again["topics"]["decision"] == "/robot1/decision"
