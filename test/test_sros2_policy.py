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

"""The SROS2 policy template lists exactly what the node and the console create.

The SROS2 policy template (config/sros2/helpaware.policy.xml) lists exactly what the node and the
console create: the graph of a running node (rclpy's own introspection) is compared with the
template's names, resolved the way ROS 2 resolves them (a relative name in the profile's namespace,
"~" under the node; the ROS 2 topic and service names design article).  The template is not turned
into permissions here: the wheels have no sros2 and their Fast DDS is built without security.
"""
import os
import time
import xml.etree.ElementTree as ET

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.ros.node import HelpAwareNode  # noqa: E402,I100
from helpaware_node.ros.privacy import CONSOLE_NODE, open_console  # noqa: E402
from node_harness import overrides  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402

POLICY = os.path.join(os.path.dirname(__file__), "..", "config", "sros2",
                      "helpaware.policy.xml")
ONLY_WITH_OPTIONS = {"/clock"}      # subscribed with use_sim_time:=true only


def resolve(name: str, ns: str, node: str) -> str:
    if name.startswith("/"):
        return name
    if name.startswith("~"):
        return f"{ns.rstrip('/')}/{node}/{name[1:].lstrip('/')}"
    return f"{ns.rstrip('/')}/{name}"


def profile_names(enclave_path: str) -> dict:
    root = ET.parse(POLICY).getroot()
    assert root.tag == "policy" and root.get("version") == "0.2.0"
    enclave = [e for e in root.iter("enclave") if e.get("path") == enclave_path]
    assert len(enclave) == 1, enclave_path
    profile = enclave[0].find("profiles/profile")
    ns, node = profile.get("ns"), profile.get("node")
    out = {"publish": set(), "subscribe": set(), "reply": set()}
    for group in profile:
        for right in out:
            if group.get(right) == "ALLOW":
                out[right] |= {resolve(x.text.strip(), ns, node) for x in group}
    return ns, node, out


def graph_of(probe, node: str, ns: str, executor) -> dict:
    def read():
        return {"publish": {n for n, _ in probe.get_publisher_names_and_types_by_node(node, ns)},
                "subscribe": {n for n, _ in
                              probe.get_subscriber_names_and_types_by_node(node, ns)},
                "reply": {n for n, _ in probe.get_service_names_and_types_by_node(node, ns)}}
    seen, stable_since = None, time.monotonic()
    end = time.monotonic() + 30.0
    while time.monotonic() < end:            # until discovery has settled for a second
        executor.spin_once(timeout_sec=0.1)
        now = read()
        if now != seen:
            seen, stable_since = now, time.monotonic()
        elif seen["publish"] and time.monotonic() - stable_since > 1.0:
            break
    return seen


def test_the_template_lists_exactly_the_node_and_console_endpoints(ctx):
    ns, name, allowed = profile_names("/helpaware/robot1")
    node = HelpAwareNode(context=ctx, namespace=ns,
                         parameter_overrides=overrides(store_path="memory"))
    console, _ = open_console(ctx, lambda m: None)
    probe = rclpy.create_node("sros2_probe", context=ctx)
    executor = SingleThreadedExecutor(context=ctx)
    for n in (node, console, probe):
        executor.add_node(n)
    try:
        assert name == node.get_name()
        actual = graph_of(probe, name, ns, executor)
        for right in allowed:
            assert actual[right] == allowed[right] - ONLY_WITH_OPTIONS, right
        c_ns, c_name, c_allowed = profile_names("/helpaware/console")
        assert c_name == CONSOLE_NODE
        c_actual = graph_of(probe, c_name, c_ns, executor)
        assert c_actual == c_allowed
    finally:
        executor.shutdown(timeout_sec=1.0)
        for n in (node, console, probe):
            n.destroy_node()
