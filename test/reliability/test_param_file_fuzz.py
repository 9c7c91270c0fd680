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

"""Parameter files fuzzed through rcl's own YAML parser and rclpy's type check, then the node.

Seeds: config/hospital_night.yaml and config/default.yaml. Files: random bytes, the seed with
characters deleted/duplicated/flipped/inserted, lines deleted/duplicated/re-indented, every
declared parameter given values of other types (and same-typed values out of range), unknown
parameters, and other node-name keys. Each file goes through
`rclpy.init(context=c, args=['--ros-args', '--params-file', path])` and `HelpAwareNode(context=c)`
in a child process (many contexts in one process; a segfault there names the file that caused
it). For every file exactly one of:
  config   - a node whose declared values have their declared types and build a valid config;
  rcl      - RCLError from init naming the file;
  startup  - the node's StartupError naming a declared parameter;
nothing else (no other exception, no traceback, no crash). A handful then go through the real
process entry (ros/launch_config.py): exit code 2, one stderr line naming the file or the
parameter, no 'Traceback'.

Oracles beside the node: PyYAML reading the seed files (values in force must equal the file's),
and the declared type of each parameter (ros/params.py ParamSpec.type_name): a YAML value of
another type in one parameter must be refused naming that parameter.
"""
from __future__ import annotations

import collections
import json
import os
import random
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
CONFIG = os.path.join(HERE, "..", "..", "config")
NODE_KEY = "/**/helpaware_decider:"


def batch(manifest_path: str) -> int:
    """Child process: every file of the manifest through rclpy.init and the node."""
    import gc
    import traceback

    from helpaware_node.ros import params
    from helpaware_node.ros.node import HelpAwareNode, StartupError
    import rclpy
    from rclpy._rclpy_pybind11 import RCLError

    names = [s.name for s in params.all_specs()]
    with open(manifest_path) as fh:
        cases = json.load(fh)
    for i, case in enumerate(cases):
        print(json.dumps({"start": i}), flush=True)
        out = {"i": i}
        t0 = time.monotonic()
        context = rclpy.Context()
        try:
            rclpy.init(context=context, args=["--ros-args", "--params-file", case["path"]])
        except RCLError as exc:
            out.update(outcome="rcl", message=str(exc))
        except Exception:
            out.update(outcome="other", message=traceback.format_exc())
        else:
            node = None
            try:
                node = HelpAwareNode(context=context)
                values = {n: node.get_parameter(n).value for n in names
                          if node.has_parameter(n)}
                kinds = node.get_parameter(params.KINDS_PARAM).value
                values.update({params.COST_PREFIX + k: node.get_parameter(
                    params.COST_PREFIX + k).value for k in kinds})
                out.update(outcome="config", values=values, active=node._active,
                           unknown=node.params.unknown_overrides,
                           built=repr(params.build(dict(node.params.values))[2]))
            except StartupError as exc:
                out.update(outcome="startup", message=str(exc))
            except Exception:
                out.update(outcome="other", message=traceback.format_exc())
            finally:
                if node is not None:
                    try:
                        node.destroy_node()
                    except Exception:
                        pass
        finally:
            try:       # destroys any node the context still holds (a half-built one too)
                rclpy.try_shutdown(context=context)
            except Exception:
                out.update(outcome="other", message="at context shutdown: "
                           + traceback.format_exc())
        # the cycles a node leaves (its callbacks and helpers hold it) are collected here, with
        # no rcl call in progress: collected by chance inside the next file's declare_parameter,
        # the finaliser of a handle of the shut-down context hung a child (faulthandler: in
        # "Garbage-collecting" under rclpy's to_parameter_msg), once in a few thousand files
        gc.collect()
        out["seconds"] = time.monotonic() - t0
        print(json.dumps(out, default=repr), flush=True)
    return 0


if __name__ == "__main__":     # python test_param_file_fuzz.py MANIFEST (the child)
    sys.exit(batch(sys.argv[1]))


# ------------------------------------------------------------------------ the tests
from helpaware_node.ros import launch_config, params  # noqa: E402
import pytest  # noqa: E402
from reliability_sequence import scaled, SOAK  # noqa: E402
import yaml  # noqa: E402

pytestmark = pytest.mark.ros

RANDOM_FILES = scaled(40, 400)
CHAR_EDITS = scaled(80, 1500)
LINE_EDITS = scaled(40, 600)
WRONG_TYPES_PER_PARAM = 2             # of the 7 other YAML types (all 7 under soak)
CHILDREN = 2                          # batch processes side by side (a 2-core machine)
CHUNK = 160                           # files per child process
CHILD_TIMEOUT_S = 300                 # per chunk; a hang fails naming the file it was on
SEED = 20261202
SEED_FILES = ("hospital_night.yaml", "default.yaml")
SPECS = {s.name: s for s in params.all_specs()}
SPECS[params.KINDS_PARAM] = params.NODE_PARAMS[3]

# YAML literals by the type rcl gives them (rcl_yaml_param_parser): the other types are wrong
LITERALS = {"integer": ["7", "-3", "0x10"], "double": ["1.5", "-0.25", "1.0e3"],
            "bool": ["true", "false"], "string": ['"s"', "word", "'1.0'"],
            "string array": ['["a", "b"]'], "integer array": ["[1, 2]"],
            "double array": ["[1.5]"], "bool array": ["[true]"]}
# same type, bad value: rclpy's ranges or the node's own checks must refuse them
BAD_VALUES = {"double": [".nan", ".inf", "-.inf", "-1.0e300", "1.0e300"],
              "integer": ["-1", "9223372036854775807"]}
NO_RANGE = {"robot_id", "store_path", "navigation_status_topic", "autostart",
            "asking_enabled", "count_peer_asks", "protected_activities", params.KINDS_PARAM}


def _seed_text(name: str) -> str:
    with open(os.path.join(CONFIG, name), encoding="utf-8") as fh:
        return fh.read()


def _set_line(text: str, name: str, literal: str) -> str:
    lines = text.split("\n")
    idx = [i for i, ln in enumerate(lines) if ln.strip().startswith(name + ":")]
    assert idx, name
    lines[idx[0]] = f"    {name}: {literal}"
    return "\n".join(lines)


def corpus(tmp_path) -> list[dict]:
    rng = random.Random(SEED)
    seeds = {n: _seed_text(n) for n in SEED_FILES}
    cases = []

    def add(kind, data, **extra):
        path = tmp_path / f"{len(cases):04d}_{kind}.yaml"
        path.write_bytes(data if isinstance(data, bytes) else data.encode("utf-8",
                                                                          "surrogatepass"))
        cases.append({"path": str(path), "kind": kind, **extra})

    for name, text in seeds.items():
        add("seed", text, seed=name)
    for _ in range(RANDOM_FILES):
        if rng.random() < 0.5:
            add("random_bytes", rng.randbytes(rng.choice([0, 1, 2, 16, rng.randint(0, 4000)])))
        else:   # a valid start, then garbage
            text = rng.choice(list(seeds.values()))
            cut = rng.randint(0, len(text))
            add("prefix_then_bytes", text[:cut].encode() + rng.randbytes(rng.randint(1, 300)))
    for _ in range(CHAR_EDITS):
        text = rng.choice(list(seeds.values()))
        for _ in range(rng.randint(1, 5)):
            i = rng.randrange(len(text))
            op = rng.choice(["delete", "duplicate", "flip", "insert"])
            if op == "delete":
                text = text[:i] + text[i + 1:]
            elif op == "duplicate":
                text = text[:i + 1] + text[i:]
            elif op == "flip":
                text = text[:i] + chr((ord(text[i]) ^ (1 << rng.randrange(7))) or 1) + text[i + 1:]
            else:
                text = text[:i] + rng.choice(list(":-[]{}\"'#&*!|>%@`,\t ") + ["\n",
                                                                               "\x00"]) + text[i:]
        add("char_edit", text)
    for _ in range(LINE_EDITS):
        lines = rng.choice(list(seeds.values())).split("\n")
        i = rng.randrange(len(lines))
        op = rng.choice(["delete", "duplicate", "indent", "dedent", "swap"])
        if op == "delete":
            del lines[i]
        elif op == "duplicate":
            lines.insert(i, lines[i])
        elif op == "indent":
            lines[i] = "  " + lines[i]
        elif op == "dedent":
            lines[i] = lines[i][2:]
        else:
            j = rng.randrange(len(lines))
            lines[i], lines[j] = lines[j], lines[i]
        add("line_edit", "\n".join(lines))
    base = seeds["default.yaml"]
    for name, spec in sorted(SPECS.items()):
        declared = spec.type_name
        others = sorted(k for k in LITERALS if k != declared)
        chosen = others if SOAK else rng.sample(others, WRONG_TYPES_PER_PARAM)
        if name == "max_distance_m" and "string array" not in chosen:
            chosen.append("string array")          # the one the process-entry test uses
        for kind in chosen:
            add("wrong_type", _set_line(base, name, rng.choice(LITERALS[kind])), param=name,
                literal_type=kind)
        bad = BAD_VALUES.get(declared, []) if name not in NO_RANGE else []
        for literal in (bad if SOAK else rng.sample(bad, min(1, len(bad)))):
            add("bad_value", _set_line(base, name, literal), param=name)
    add("wrong_type", base.replace("    k_load:", "    use_sim_time: 1\n    k_load:"),
        param="use_sim_time", literal_type="integer")     # declared by rclpy's Node itself
    for literal in ("[]", "~", ""):
        for name in ("request_kinds", "protected_activities", "k_busy", "robot_id"):
            add("empty_value", _set_line(base, name, literal), param=name)
    add("bad_value", _set_line(base, "navigation_status_topic", '"/"'),
        param="navigation_status_topic")
    add("bad_value", _set_line(base, "navigation_status_topic", '"two words"'),
        param="navigation_status_topic")
    add("bad_value", _set_line(base, "robot_id", '"ward/7"'), param="robot_id")
    add("bad_value", _set_line(base, "request_kinds", '["door", "door"]'), param="request_kinds")
    for extra in ("no_such_parameter: 1.0", "k_bsuy: 2.5", "continue_cost_s.lift: 10.0",
                  "k_busy:\n      nested: 1.0"):
        add("unknown_param", base.replace("    k_load:", "    " + extra + "\n    k_load:"),
            seed="default.yaml", unknown=extra.split(":")[0])
    night = seeds["hospital_night.yaml"]
    for key, matches in (("helpaware_decider:", True), ("/helpaware_decider:", True),
                         ("/**:", True), ("/ward/helpaware_decider:", False),
                         ("helpaware_decidr:", False), ("/**/other_node:", False),
                         ("'/**/helpaware_decider':", True)):
        add("node_key", night.replace(NODE_KEY, key), seed="hospital_night.yaml",
            matches=matches)
    add("node_key", night.replace("ros__parameters", "ros_parameters"), seed=None)
    add("node_key", night.replace("ros__parameters:", "ros__parameters: 1"), seed=None)
    return cases


def _start_child(cases, mine, tmp_path, k):
    ros_home = tmp_path / f"ros_home_{k}"      # a store of its own for each child
    ros_home.mkdir()
    workdir = tmp_path / f"cwd_{k}"           # a flipped store_path may name a relative file
    workdir.mkdir()
    manifest = tmp_path / f"manifest_{k}.json"
    manifest.write_text(json.dumps([cases[i] for i in mine]))
    return subprocess.Popen([sys.executable, os.path.abspath(__file__), str(manifest)],
                            cwd=workdir, env=dict(os.environ, ROS_HOME=str(ros_home)),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _collect(cases, mine, proc):
    try:
        out, err = proc.communicate(timeout=CHILD_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
    got, started = {}, None
    for line in out.splitlines():
        if line.startswith("{"):
            row = json.loads(line)
            if "start" in row:
                started = row["start"]
            else:
                got[mine[row["i"]]] = {**row, "i": mine[row["i"]]}
    if proc.returncode != 0 or len(got) != len(mine):
        culprit = cases[mine[started]]["path"] if started is not None else "(none started)"
        pytest.fail(f"a batch child ended with {proc.returncode} at {culprit}: {err[-1500:]}")
    return got


def run_batch(cases, tmp_path):
    """Return the files in chunks of CHUNK.

    CHILDREN child processes at a time (a fresh process per chunk: the cost per context grows over
    thousands of them); returns {index: result}. A child that dies (a segfault in rcl, say) or
    hangs names the file it was on.
    """
    chunks = [list(range(i, min(i + CHUNK, len(cases)))) for i in range(0, len(cases), CHUNK)]
    results, running = {}, []
    for k, mine in enumerate(chunks):
        if len(running) == CHILDREN:
            results.update(_collect(cases, *running.pop(0)))
        running.append((mine, _start_child(cases, mine, tmp_path, k)))
    for mine, proc in running:
        results.update(_collect(cases, mine, proc))
    return results


@pytest.fixture(scope="module")
def fuzz(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("paramfuzz")
    cases = corpus(tmp)
    t0 = time.monotonic()
    results = run_batch(cases, tmp)
    return cases, results, time.monotonic() - t0


TYPE_CHECK = {"double": lambda v: isinstance(v, float), "bool": lambda v: isinstance(v, bool),
              "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
              "string": lambda v: isinstance(v, str),
              "string array": lambda v: isinstance(v, list) and all(isinstance(x, str) for x in v)}


def _names_a_parameter(message: str) -> bool:
    """Return a parameter by name, or the store file the parameters point at (store_path)."""
    return (any(n in message for n in SPECS) or "use_sim_time" in message
            or ("could not open" in message and "store" in message))


def test_every_file_gives_a_config_or_a_named_refusal(fuzz):
    cases, results, _ = fuzz
    for case in cases:
        r = results[cases.index(case)]
        where = (case["path"], r.get("message", "")[-600:])
        assert r["outcome"] in ("config", "rcl", "startup"), where
        assert "Traceback" not in r.get("message", ""), where
        if r["outcome"] == "rcl":
            assert case["path"] in r["message"], where           # the file is named
        elif r["outcome"] == "startup":
            assert _names_a_parameter(r["message"]), where        # the parameter is named
        else:
            for name, value in r["values"].items():
                spec = SPECS.get(name)
                kind = spec.type_name if spec else "double"       # continue_cost_s.<kind>
                assert TYPE_CHECK[kind](value), (case["path"], name, value)


def test_a_value_of_another_type_is_refused_naming_the_parameter(fuzz):
    cases, results, _ = fuzz
    typed = [(c, results[i]) for i, c in enumerate(cases)
             if c["kind"] in ("wrong_type", "bad_value")]
    per_param = collections.Counter(c["param"] for c, _ in typed if c["kind"] == "wrong_type")
    assert set(SPECS) <= set(per_param) and min(per_param.values()) >= 1
    assert min(per_param[n] for n in SPECS) >= WRONG_TYPES_PER_PARAM
    for case, r in typed:
        assert r["outcome"] in ("startup", "rcl"), (case, r.get("values", {}).get(case["param"]))
        if r["outcome"] == "startup":
            assert case["param"] in r["message"], (case, r["message"])


def test_seed_files_load_with_the_values_pyyaml_reads(fuzz):
    """Outside reader: PyYAML. rcl's parse of the shipped files must give the same values."""
    cases, results, _ = fuzz
    checked = 0
    for i, case in enumerate(cases):
        if case["kind"] not in ("seed", "unknown_param", "node_key") or not case.get("seed"):
            continue
        if case["kind"] == "node_key" and not case["matches"]:
            expect = params.defaults()        # a key for another node: the file is ignored
        else:
            expect = yaml.safe_load(_seed_text(case["seed"]))[NODE_KEY[:-1]]["ros__parameters"]
        r = results[i]
        assert r["outcome"] == "config", (case, r.get("message"))
        for name, value in expect.items():
            assert r["values"][name] == value, (case["path"], name, r["values"][name], value)
            checked += 1
        if case["kind"] == "unknown_param":       # ignored by ROS, but named in a warning
            assert case["unknown"] in " ".join(r["unknown"]), (case, r["unknown"])
    assert checked > 300


def test_zz_report_counts(fuzz):
    cases, results, seconds = fuzz
    table = collections.defaultdict(collections.Counter)
    for i, case in enumerate(cases):
        table[case["kind"]][results[i]["outcome"]] += 1
    print(f"\nparameter-file fuzz: {len(cases)} files in {seconds:.1f} s "
          f"({CHILDREN} child processes at a time, {CHUNK} files each)")
    print(f"{'kind':<20}{'files':>7}{'config':>8}{'rcl':>6}{'startup':>9}")
    for kind, c in sorted(table.items()):
        print(f"{kind:<20}{sum(c.values()):>7}{c['config']:>8}{c['rcl']:>6}{c['startup']:>9}")
    assert sum(c["rcl"] for c in table.values()) > 0
    assert sum(c["startup"] for c in table.values()) > 0
    assert sum(c["config"] for c in table.values()) > 0


# ------------------------------------------------------------------------ process entry
def _refused_start(path, timeout_s=60):
    proc = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE, params=str(path))
    try:
        _, err = proc.communicate(timeout=timeout_s)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        pytest.fail(f"the node did not exit on {path}")
    return proc.returncode, err


@pytest.mark.parametrize("kind", ["random_bytes", "char_edit_rcl", "wrong_type",
                                  "empty_request_kinds", "bad_topic"])
def test_refused_files_through_the_process_entry(fuzz, kind):
    cases, results, _ = fuzz
    if kind == "random_bytes":
        pick = [c for i, c in enumerate(cases) if c["kind"] == "random_bytes"
                and results[i]["outcome"] == "rcl"][0]
    elif kind == "char_edit_rcl":
        pick = [c for i, c in enumerate(cases) if c["kind"] == "char_edit"
                and results[i]["outcome"] == "rcl"][0]
    elif kind == "wrong_type":
        pick = [c for c in cases if c["kind"] == "wrong_type" and c["param"] == "max_distance_m"
                and c["literal_type"] == "string array"][0]
    elif kind == "empty_request_kinds":
        pick = [c for c in cases
                if c["kind"] == "empty_value" and c["param"] == "request_kinds"][0]
    else:
        pick = [c for c in cases if c.get("param") == "navigation_status_topic"][0]
    rc, err = _refused_start(pick["path"])
    assert rc == 2, err[-2000:]
    assert "Traceback" not in err, err[-2000:]
    ours = [ln for ln in err.splitlines() if ln.startswith(launch_config.NODE_NAME + ":")]
    assert len(ours) == 1, err[-2000:]
    named = pick["path"] if kind in ("random_bytes", "char_edit_rcl") else pick["param"]
    assert named in ours[0], (named, ours[0])
