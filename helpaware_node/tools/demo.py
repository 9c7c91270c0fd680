"""`helpaware demo`: the main job on the embedded defaults."""
from __future__ import annotations

import argparse

from . import demo_core


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--seed", type=int, default=7, help="seed of the invented outcomes")


def run(args: argparse.Namespace) -> int:
    demo_core.run(seed=args.seed)
    return 0
