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

"""`helpaware demo`: the decision node as a process, driven by the night-shift scenario.

The steps are in demo/night_run.py.
`helpaware demo --core-only` prints the scripted core-only table instead (no ROS).
"""
from __future__ import annotations

import argparse

from ..demo import core_story
from ..demo.night_run import run_night_shift


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--seed", type=int, default=11, help="seed of the invented night shift")
    parser.add_argument("--needs", type=int, default=90, help="help needs in the night")
    parser.add_argument("--core-only", action="store_true",
                        help="only the scripted core table (no ROS processes)")
    parser.add_argument("--namespace", default="/demo_robot", help="namespace of the node")


def run(args: argparse.Namespace) -> int:
    if args.core_only:
        core_story.run(seed=7)
        return 0
    return run_night_shift(args)
