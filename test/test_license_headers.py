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

"""Every source file opens with the project's Apache-2.0 header.

ament_copyright (test_copyright.py) checks this on a ROS install; it has no wheel, so here this
test keeps a new file from going without the header: after an optional shebang, a comment
block with a `Copyright <year> <holder>` line and the Apache License 2.0 notice of the
license's own appendix (LICENSE, "How to apply the Apache License to your work"), the license
package.xml and setup.py declare.
"""
import os
import re

from lint_paths import ROOT, SOURCE_PATHS
import pytest

COPYRIGHT_RE = re.compile(r"^# Copyright \d{4}(-\d{4})? \S.*$")


def notice_lines() -> list[str]:
    """Return the notice of LICENSE's appendix, without its bracketed copyright line."""
    with open(os.path.join(ROOT, "LICENSE"), encoding="utf-8") as fh:
        appendix = fh.read().split("APPENDIX", 1)[1]
    start = appendix.index("Licensed under the Apache License")
    end = appendix.index("limitations under the License.") + len("limitations under the License.")
    return [line.strip() for line in appendix[start:end].splitlines()]


def python_sources() -> list[str]:
    out = []
    for path in SOURCE_PATHS:
        if os.path.isfile(path):
            out.append(path)
            continue
        for dirpath, dirnames, filenames in os.walk(path):
            dirnames[:] = [d for d in dirnames if d[0] not in "._"]   # as ament_copyright walks
            out += [os.path.join(dirpath, n) for n in filenames if n.endswith(".py")]
    return sorted(out)


def header_of(path: str) -> tuple[str, list[str]]:
    """Return the copyright line and the rest of the first comment block (comment marks off)."""
    with open(path, encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    if lines and lines[0].startswith("#!"):
        lines = lines[1:]
    while lines and not lines[0].strip():      # ament_copyright skips blank lines there too
        lines = lines[1:]
    block = []
    for line in lines:
        if not line.startswith("#"):
            break
        block.append(line)
    if not block:
        return "", []
    return block[0], [line[1:].strip() for line in block[1:]]


@pytest.mark.linter
def test_the_license_file_is_the_apache_license_2_0():
    with open(os.path.join(ROOT, "LICENSE"), encoding="utf-8") as fh:
        text = fh.read()
    assert "Apache License" in text and "Version 2.0, January 2004" in text
    assert len(notice_lines()) >= 10


@pytest.mark.linter
@pytest.mark.parametrize("path", python_sources(), ids=lambda p: os.path.relpath(p, ROOT))
def test_each_source_opens_with_the_header(path):
    with open(path, encoding="utf-8") as fh:
        if not fh.read().strip():
            pytest.skip("empty file: ament_copyright skips it too")
    first, rest = header_of(path)
    assert COPYRIGHT_RE.match(first), f"{path}: first comment line is {first!r}"
    notice = [line for line in notice_lines() if line]
    assert [line for line in rest if line] == notice, f"{path}: not the Apache-2.0 notice"
