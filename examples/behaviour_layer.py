"""Example: the behaviour-layer side. Opens a help need when the robot is stuck, follows the
decision, and resolves the need when the way is clear (or cancels it when giving up).

Run next to the node:  python examples/behaviour_layer.py --ros-args -r __ns:=/robot1
Here "stuck" is simulated by a timer; a real robot calls `open_need` from its behaviour tree
(for example when a door does not open) and `resolve` once it has passed.
"""
import itertools
import sys

import rclpy
from rclpy.executors import ExternalShutdownException
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from helpaware_node import wire

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


class BehaviourLayer(Node):
    def __init__(self, stuck_period_s: float = 0.0, **kwargs):
        super().__init__("behaviour_layer", **kwargs)
        self.task_pub = self.create_publisher(String, "task_status", RELIABLE)
        self.create_subscription(String, "decision", self._on_decision, RELIABLE)
        self.create_subscription(String, "outcome", self._on_outcome, RELIABLE)
        self._ids = itertools.count(1)
        self.open = {}            # request id -> kind
        self.finished = {}        # request id -> how it ended
        if stuck_period_s > 0:
            self.create_timer(stuck_period_s, lambda: self.open_need("door"))

    def open_need(self, kind: str, urgency: float = 0.0) -> str:
        rid = f"{self.get_name()}-{next(self._ids)}"
        self.open[rid] = kind
        self.task_pub.publish(String(data=wire.task_status_document(rid, "open", kind, urgency)))
        return rid

    def resolve(self, rid: str, state: str = "resolved") -> None:
        if self.open.pop(rid, None) is not None:
            self.task_pub.publish(String(data=wire.task_status_document(rid, state)))
            self.finished[rid] = state

    def _on_decision(self, msg: String) -> None:
        try:
            d = wire.decode("decision", msg.data)
        except wire.WireError as exc:
            self.get_logger().warning(f"bad decision document: {exc}")
            return
        if d["request_id"] not in self.open:
            return
        if d["action"] == "continue":
            # the robot carries on alone (waits for the door, takes another route...)
            self.get_logger().info(f"{d['request_id']}: carry on alone ({d['why']})")
            self.resolve(d["request_id"], "cancelled")
        else:
            self.get_logger().info(f"{d['request_id']}: asking {d['person_id']}")

    def _on_outcome(self, msg: String) -> None:
        try:
            o = wire.decode("outcome", msg.data)
        except wire.WireError:
            return
        if o["result"] == "helped":
            self.resolve(o["request_id"])      # in a real robot: once it has passed the door


def main(args=None):
    rclpy.init(args=args)
    node = None
    try:
        node = BehaviourLayer(stuck_period_s=20.0)
        rclpy.spin(node)
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    finally:
        if node is not None:
            node.destroy_node()
        rclpy.try_shutdown()


if __name__ == "__main__":
    sys.exit(main())
