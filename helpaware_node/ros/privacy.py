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

"""Live opt-out and forget: the robot's privacy topic, and the console that sends to it.

Topic `/helpaware/privacy_request` by default (the node's `privacy_topic` parameter): absolute,
so one request reaches every robot of the site whatever its namespace.  A request is a signed
forget or opt_out document (fleet_documents.py) that `helpaware privacy` sends; the robot
checks the signature and the request's age, applies it once, and answers it on the fleet
topic with its own signed act, which carries it on to every robot (also those that were not
listening) and tells the console who applied it.  Unsigned requests ({"action": ...,
"person_id" | "person_key": ...}) are refused unless `allow_unsigned_privacy_requests` is set
(a lab setup).  Refusals are counted by reason and logged once, then throttled.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import socket
import time
from typing import Callable, Optional

from rclpy.qos import DurabilityPolicy, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from .refusal_log import CountsRefusals, HANDLER_ERROR, LogThrottle, Refusals
from ..core import CoreInputError
from ..fleet_documents import (
    check_fresh,
    decode_document,
    decode_parsed,
    encode_document,
    load_document,
    MALFORMED,
    parse_unsigned_request,
    PRIVACY_KINDS,
    PrivacyAct,
)
from ..signing import (
    BAD_SIGNATURE,
    EXPIRED_KEY,
    KeyRing,
    OTHER_SITE,
    Refused,
    UNKNOWN_KEY,
    UNSIGNED,
)

PRIVACY_TOPIC = "/helpaware/privacy_request"   # site-wide, like the fleet topic
PRIVACY_QOS = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE,
                         durability=DurabilityPolicy.VOLATILE)
PRIVACY_REFUSALS = (UNSIGNED, OTHER_SITE, UNKNOWN_KEY, EXPIRED_KEY, BAD_SIGNATURE, MALFORMED,
                    HANDLER_ERROR)
ALLOW_UNSIGNED_PARAM = "allow_unsigned_privacy_requests"


class PrivacyRequests(CountsRefusals):
    """The node's privacy topic.

    `fleet` (a FleetLink) applies and passes on each request; `on_applied(action, key)` lets the
    node drop what it holds in memory at once.
    """

    def __init__(self, node, store, fleet=None,
                 on_applied: Optional[Callable[[str, str], None]] = None,
                 topic: str = PRIVACY_TOPIC, allow_unsigned: bool = False,
                 keys: Optional[KeyRing] = None, clock: Callable[[], float] = time.time) -> None:
        self._node, self._store, self._fleet, self._on_applied = node, store, fleet, on_applied
        self._keys = keys if keys is not None else (
            fleet.keys if fleet is not None else store.site_keys.key_ring())
        self._clock = clock
        self.topic = topic
        self.allow_unsigned = bool(allow_unsigned)
        self.applied_count = 0
        self.duplicate_count = 0      # a request applied here already (a replay, an echo)
        self.store_failures = 0       # a request the store refused (disk full, read-only)
        self._refused = Refusals(node.get_logger().warning, topic)   # by reason, logged once
        self._log = LogThrottle()     # applied requests: lines by kind, bounded
        self._sub = node.create_subscription(String, topic, self._on_message, PRIVACY_QOS)
        if self.allow_unsigned:
            node.get_logger().warning(f"{topic}: {ALLOW_UNSIGNED_PARAM} is true: anyone on the "
                                      "ROS graph can opt people out and erase them (lab only)")

    def apply(self, text: str) -> tuple[str, str]:
        """Apply a request now and return its (action, person_key) (or those applied here before).

        Raises CoreInputError (signing.Refused for a signature reason) for a refused one.
        """
        what = self.topic
        doc = load_document(text, what)
        if "v" not in doc:                          # the unsigned lab form
            if not self.allow_unsigned:
                raise Refused(UNSIGNED, f"{what}: unsigned request refused; send it with "
                              "`helpaware privacy opt-out|forget` (signed with the site key), "
                              f"or set {ALLOW_UNSIGNED_PARAM}:=true on a lab setup")
            action, key = parse_unsigned_request(doc, self._store.key_for, what)
            self._apply_unsigned(action, key)
        else:
            kind, act = decode_parsed(doc, self._keys, self._clock(), what)
            if kind not in PRIVACY_KINDS:
                raise CoreInputError(f"{what}: kind {kind!r} is not a privacy request "
                                     f"({' or '.join(PRIVACY_KINDS)})")
            check_fresh(act, self._clock(), what)
            action, key = act.action, act.person_key
            if self._fleet is not None:
                if not self._fleet.apply_act(act):
                    self.duplicate_count += 1       # this request was applied here already
                    return action, key
            else:
                self._apply_unsigned(action, key)
        self.applied_count += 1
        if self._on_applied is not None:
            self._on_applied(action, key)
        return action, key

    def _apply_unsigned(self, action: str, key: str) -> None:
        if self._fleet is not None:
            (self._fleet.opt_out if action == "opt_out" else self._fleet.forget)(key)
        elif action == "opt_out":
            self._store.opt_out(key)
        else:
            self._store.forget(key)

    def diagnostic_values(self) -> dict[str, object]:
        values: dict[str, object] = {f"privacy_request.refused.{r}": self.refusals[r]
                                     for r in PRIVACY_REFUSALS}
        values.update({"privacy_request.applied": self.applied_count,
                       "privacy_request.duplicates": self.duplicate_count,
                       "privacy_request.store_failures": self.store_failures,
                       "privacy_request.lines_held_back": self._log.held_back,
                       "privacy_request.topic": self.topic,
                       f"privacy_request.{ALLOW_UNSIGNED_PARAM}": self.allow_unsigned})
        return values

    def _on_message(self, msg: String) -> None:
        """One request: applied, or refused and counted by reason.

        Whatever it does is contained here. Applied requests are logged like refusals (the first of
        each kind at once, then at most one line a minute with the number since; counts in
        /diagnostics), so a flood of valid requests is no flood of lines.
        """
        n = self.duplicate_count
        try:
            action, key = self.apply(msg.data)
        except CoreInputError as exc:
            self._refused.add(exc)
            return
        except Exception as exc:  # noqa: BLE001 - no request may stop the robot
            if self._refused.failed(exc, self._log, self._node.get_logger().error):
                self.store_failures += 1
            return
        done = "already applied" if self.duplicate_count > n else "applied"
        text = self._log.due(f"{action} {done}", f"{self.topic}: {action} {done} to "
                             f"{key[:12]}...")
        if text is not None:
            self._node.get_logger().info(text)


# -- the operator console's side (`helpaware privacy`) ---------------------------------------
@dataclass
class ConsoleResult:
    request_id: str
    subscribers: int                     # listeners on the privacy topic when it was sent
    confirmed_by: list[str] = field(default_factory=list)   # robots that applied it
    elapsed_s: float = 0.0               # from sending until every answer came (or time ran out)


CONSOLE_NODE = "helpaware_privacy_console"


def console_name() -> str:
    return f"console@{socket.gethostname().split('.')[0] or 'host'}"[:64]


def open_console(context, on_fleet: Callable[[String], None], topic: str = PRIVACY_TOPIC,
                 fleet_topic: str = ""):
    """Return the console's node.

    Publishes on the privacy topic, reads the fleet topic, and has nothing else (no parameter
    services, no /rosout), so its SROS2 profile stays small (config/sros2/helpaware.policy.xml).
    Returns (node, publisher).
    """
    import rclpy

    from .fleet import fleet_reader_qos, FLEET_TOPIC
    node = rclpy.create_node(CONSOLE_NODE, context=context, start_parameter_services=False,
                             enable_rosout=False)
    node.create_subscription(String, fleet_topic or FLEET_TOPIC, on_fleet, fleet_reader_qos())
    return node, node.create_publisher(String, topic, PRIVACY_QOS)


def send_privacy_request(action: str, person_key: str, keys: KeyRing, *,
                         topic: str = PRIVACY_TOPIC, fleet_topic: str = "",
                         robots: int = 0, wait_s: float = 10.0, sender: str = "",
                         on_confirmed: Optional[Callable[[str], None]] = None) -> ConsoleResult:
    """Send one signed request and collect the robots' answers on the fleet topic.

    Waits up to `wait_s` for a listener (with `robots` > 0, for that many), sends, then waits
    up to `wait_s` for `robots` answers (0: one per listener seen).  Own rclpy context.
    """
    import rclpy
    from rclpy.executors import SingleThreadedExecutor

    if action not in PRIVACY_KINDS:
        raise CoreInputError(f"action: {action!r} is not one of {', '.join(PRIVACY_KINDS)}")
    act = PrivacyAct.new(action, person_key, sender or console_name())
    encode_document(action, act, keys)     # refuses a bad key before any ROS start-up
    result = ConsoleResult(act.act_id, 0)

    def heard(msg: String) -> None:
        try:
            kind, value = decode_document(msg.data, keys)
        except CoreInputError:
            return
        if (kind in PRIVACY_KINDS and value.request_id == act.act_id
                and value.sender != act.sender and value.sender not in result.confirmed_by):
            result.confirmed_by.append(value.sender)
            if on_confirmed is not None:
                on_confirmed(value.sender)

    def spin_until(predicate, timeout_s: float) -> bool:
        end = time.monotonic() + timeout_s
        while time.monotonic() < end and not predicate():
            executor.spin_once(timeout_sec=0.05)
        return predicate()

    ctx = rclpy.Context()
    rclpy.init(args=[], context=ctx)
    executor = SingleThreadedExecutor(context=ctx)
    node = None
    try:
        node, pub = open_console(ctx, heard, topic, fleet_topic)
        executor.add_node(node)
        want = max(robots, 1)
        if spin_until(lambda: pub.get_subscription_count() >= want, wait_s) and robots <= 0:
            spin_until(lambda: False, 1.0)      # the other robots are usually found together
        result.subscribers = pub.get_subscription_count()
        if result.subscribers == 0:
            return result
        act = PrivacyAct(act.action, act.person_key, act.sender, act.act_id, act.request_id,
                         time.time())           # issued now, after discovery
        pub.publish(String(data=encode_document(action, act, keys)))
        target = robots if robots > 0 else result.subscribers
        t0 = time.monotonic()
        spin_until(lambda: len(result.confirmed_by) >= target, wait_s)
        result.elapsed_s = time.monotonic() - t0
        spin_until(lambda: False, 0.2)          # let the publisher hand the request over
        return result
    finally:
        executor.shutdown(timeout_sec=1.0)
        if node is not None:
            node.destroy_node()
        rclpy.try_shutdown(context=ctx)
