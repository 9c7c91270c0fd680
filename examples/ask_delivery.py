"""Example: the side that speaks to people. On an `ask` decision it delivers the ask (screen,
speech...) and reports what happened as an `outcome` document.

Run next to the node:  python examples/ask_delivery.py --ros-args -r __ns:=/robot1
Here the person's answer is simulated by `answer_fn`; a real robot shows a prompt and maps
the reply (a button, speech, a timeout) onto helped / declined / no_response, and reports
could_not_ask when the prompt never reached the person (they walked away, the screen failed).
"""
import sys

import rclpy
from rclpy.executors import ExternalShutdownException
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from helpaware_node import wire

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


class AskDelivery(Node):
    def __init__(self, answer_fn=lambda person_id: "helped", **kwargs):
        super().__init__("ask_delivery", **kwargs)
        self.answer_fn = answer_fn
        self.outcome_pub = self.create_publisher(String, "outcome", RELIABLE)
        self.create_subscription(String, "decision", self._on_decision, RELIABLE)
        self.delivered = []

    def _on_decision(self, msg: String) -> None:
        try:
            d = wire.decode("decision", msg.data)
        except wire.WireError as exc:
            self.get_logger().warning(f"bad decision document: {exc}")
            return
        if d["action"] != "ask":
            return
        # deliver the ask to d["person_id"] here; then report the answer
        result = self.answer_fn(d["person_id"])
        self.delivered.append((d["request_id"], d["person_id"], result))
        self.outcome_pub.publish(String(data=wire.outcome_document(
            d["request_id"], d["person_id"], result)))


def main(args=None):
    rclpy.init(args=args)
    node = None
    try:
        node = AskDelivery()
        rclpy.spin(node)
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    finally:
        if node is not None:
            node.destroy_node()
        rclpy.try_shutdown()


if __name__ == "__main__":
    sys.exit(main())
