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

"""`helpaware`: one command-line tool with a subcommand per job."""
from __future__ import annotations

import argparse
import importlib
import sys

# subcommand -> (module under helpaware_node, one-line help). Each module has
# add_arguments(parser) and run(args) -> exit code; imported only when used.
SUBCOMMANDS = {
    "record": ("tools.record",
               "record the node's topics into a rosbag2 MCAP bag (hashed person ids)"),
    "review": ("tools.review",
               "report on a bag: timeline, willingness, calibration, limits, replay"),
    "demo": ("tools.demo", "run the demo scenario (invented hospital night shift)"),
    "fit": ("tools.fit", "fit the site constants from logged outcomes; writes a parameter file"),
    "store": ("tools.store_admin",
              "inspect the belief store; opt out, forget, compact, export CSV"),
    "simulate": ("tools.simulate", "run every policy on a simulated site; table, JSON, plots"),
    "privacy": ("tools.privacy", "opt out or erase a person on every robot (signed requests)"),
    "shm-sweep": ("tools.shm_sweep",
                  "remove the shared-memory files that killed decision nodes left"),
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="helpaware", description=__doc__)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    for name, (module, help_text) in SUBCOMMANDS.items():
        p = sub.add_parser(name, help=help_text, description=help_text)
        p.set_defaults(_module=module)
        importlib.import_module(f"helpaware_node.{module}").add_arguments(p)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    module = importlib.import_module(f"helpaware_node.{args._module}")
    try:
        return int(module.run(args) or 0)
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
