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

"""Run every bench/bench_*.py (each with a time limit) and write bench/RESULTS.md.

Each benchmark's stdout goes into the report as it printed it; a failure or a time-out is
recorded with its exit code and the end of its stderr, never hidden. Hand-written notes in
bench/notes_*.md are appended verbatim; figures in bench/figures/ are linked.
"""
from __future__ import annotations

import argparse
import datetime as dt
import glob
import os
import platform
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))


def machine() -> str:
    cpu = platform.processor() or "unknown cpu"
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    mem = ""
    try:
        with open("/proc/meminfo", encoding="utf-8") as fh:
            kb = int(fh.readline().split()[1])
            mem = f", {kb / 1048576:.1f} GiB RAM"
    except (OSError, ValueError, IndexError):
        pass
    return (f"{cpu}, {os.cpu_count()} logical CPUs{mem}; {platform.system()} "
            f"{platform.release()}; Python {platform.python_version()}")


def run_one(path: str, limit_s: float) -> dict:
    start = time.monotonic()
    try:
        proc = subprocess.run([sys.executable, path], capture_output=True, text=True,
                              timeout=limit_s, cwd=os.path.dirname(HERE))
        status = "ok" if proc.returncode == 0 else f"failed (exit {proc.returncode})"
        out, err = proc.stdout, proc.stderr
    except subprocess.TimeoutExpired as exc:
        status = f"timed out after {limit_s:.0f} s"
        out = exc.stdout.decode() if isinstance(exc.stdout, bytes) else (exc.stdout or "")
        err = exc.stderr.decode() if isinstance(exc.stderr, bytes) else (exc.stderr or "")
    return {"name": os.path.basename(path), "status": status, "stdout": out, "stderr": err,
            "seconds": time.monotonic() - start}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--limit-s", type=float, default=900.0, help="time limit per benchmark")
    ap.add_argument("--out", default=os.path.join(HERE, "RESULTS.md"))
    args = ap.parse_args(argv)
    benches = sorted(glob.glob(os.path.join(HERE, "bench_*.py")))
    results = []
    for path in benches:
        print(f"run_all: {os.path.basename(path)} ...", file=sys.stderr, flush=True)
        r = run_one(path, args.limit_s)
        print(f"run_all: {r['name']}: {r['status']} in {r['seconds']:.1f} s", file=sys.stderr,
              flush=True)
        results.append(r)
    now = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    lines = ["# Benchmark results", "", f"Written by `make bench` (bench/run_all.py) on {now}.",
             "", f"Machine: {machine()}", "",
             "Every figure below was measured in this one run; ratios compare things measured "
             "side by side in the same process.", "", "| benchmark | status | wall time s |",
             "|---|---|---|"]
    lines += [f"| {r['name']} | {r['status']} | {r['seconds']:.1f} |" for r in results]
    for r in results:
        lines += ["", f"## {r['name']} ({r['status']})", "", "```", r["stdout"].rstrip(), "```"]
        if r["status"] != "ok":
            tail = "\n".join(r["stderr"].rstrip().splitlines()[-20:])
            lines += ["", "End of stderr:", "", "```", tail, "```"]
    figures = sorted(glob.glob(os.path.join(HERE, "figures", "*.png")))
    if figures:
        lines += ["", "## Figures", ""]
        lines += [f"![{os.path.basename(f)}](figures/{os.path.basename(f)})" for f in figures]
    for note in sorted(glob.glob(os.path.join(HERE, "notes_*.md"))):
        with open(note, encoding="utf-8") as fh:
            lines += ["", fh.read().rstrip()]
    with open(args.out, "w", encoding="utf-8") as fh:
        fh.write("\n".join(lines) + "\n")
    print(f"run_all: wrote {args.out}", file=sys.stderr)
    return 0 if all(r["status"] == "ok" for r in results) else 1


if __name__ == "__main__":
    sys.exit(main())
