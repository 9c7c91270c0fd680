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

"""`helpaware review BAG --out DIR`: report.html (plots embedded), summary.json, decisions.csv.

`--params other.yaml` adds a counterfactual replay of every recorded help need under the other
parameters (values the file does not set keep their recorded values).  A damaged bag still
gives a partial report; the exit code is then 3 and the error names the file and how far it
was read.
"""
from __future__ import annotations

import argparse
import sys

from ..bag import BagReadError
from ..review.report import build, summary_text


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bag", help="bag directory, or a .mcap / .db3 file")
    parser.add_argument("--out", required=True, help="directory for the report (created)")
    parser.add_argument("--params", metavar="YAML",
                        help="other node parameter file: replay every help need under it")
    parser.add_argument("--pending-timeout", type=float, metavar="SECONDS",
                        help="an ask with no outcome after this long counts as expired "
                        "(default: the node's parameter if recorded, else 120, the node default)")


def run(args: argparse.Namespace) -> int:
    from ..node_param_file import ParamFileError
    try:
        summary = build(args.bag, args.out, args.params, args.pending_timeout)
    except BagReadError as exc:
        print(f"review: {exc}", file=sys.stderr)
        return 2
    except ParamFileError as exc:
        print(f"review: {exc}", file=sys.stderr)
        return 2
    sys.stdout.write(summary_text(summary, args.out))
    if summary["read_error"]:
        print(f"review: partial report; {summary['read_error']}", file=sys.stderr)
        return 3
    return 0
