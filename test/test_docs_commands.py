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

"""Wherever the README and docs show a command of ours, the ROS 2 workspace form is beside it.

In a colcon workspace the executables are in lib/helpaware_node/, off PATH (ament_python), so
`helpaware fit ...` is `ros2 run helpaware_node helpaware fit ...` there. A fenced block that
starts one of our commands must have that form in it or in the lines right after it; a README
table row that names one must name it too. (RELIABILITY.md lists test commands, not tools.)
"""
import glob
import os
import re

import pytest

ROOT = os.path.join(os.path.dirname(__file__), "..")
DOCS = [os.path.join(ROOT, "README.md")] + sorted(
    p for p in glob.glob(os.path.join(ROOT, "docs", "*.md")) if not p.endswith("RELIABILITY.md"))
OUR_COMMAND = re.compile(r"^(\.venv/bin/)?(helpaware|helpaware_decider|example_\w+)( |$)")
WORKSPACE_FORM = re.compile(r"ros2 (run|launch) helpaware_node")
LINES_AFTER = 6


def blocks(lines):
    """(first line index, lines) of each fenced block."""
    i = 0
    while i < len(lines):
        if lines[i].startswith("```"):
            j = i + 1
            while j < len(lines) and not lines[j].startswith("```"):
                j += 1
            yield j, lines[i + 1:j]
            i = j + 1
        else:
            i += 1


@pytest.mark.parametrize("path", DOCS, ids=[os.path.basename(p) for p in DOCS])
def test_every_command_block_has_its_workspace_form(path):
    with open(path) as fh:
        lines = fh.read().splitlines()
    checked = 0
    for end, block in blocks(lines):
        ours = [x for x in block if OUR_COMMAND.match(x.strip())]
        if not ours:
            continue
        checked += 1
        near = "\n".join(block + lines[end + 1:end + 1 + LINES_AFTER])
        assert WORKSPACE_FORM.search(near), f"{os.path.basename(path)}: {ours[0]!r}"
    if os.path.basename(path) in ("fit.md", "review.md", "scenarios.md", "store.md",
                                  "parameters.md", "README.md"):
        assert checked, "these pages show commands: the pattern must find them"


def test_readme_command_table_gives_both_forms():
    with open(os.path.join(ROOT, "README.md")) as fh:
        rows = [x for x in fh.read().splitlines() if x.startswith("| `helpaware ")]
    assert len(rows) >= 6
    for row in rows:
        sub = re.match(r"\| `helpaware (\w+)", row).group(1)
        assert f"`ros2 run helpaware_node helpaware {sub}" in row, row
