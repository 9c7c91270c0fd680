"""`helpaware review BAG --out DIR`: an HTML report, summary.json and decisions.csv."""
from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("bag", help="bag directory or .mcap/.db3 file")
    parser.add_argument("--out", required=True, help="directory for the report")
    parser.add_argument("--params", help="other parameter file for counterfactual replay")


def run(args: argparse.Namespace) -> int:
    raise SystemExit("review: not finished yet")
