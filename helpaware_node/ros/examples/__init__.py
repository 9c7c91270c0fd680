"""Stand-ins for the nodes around the decider: perception, behaviour layer, ask delivery.

They show how to wire the decider into a robot (docs/integration.md) and double as test
fixtures: start them in your own launch tests (`ros2 run helpaware_node example_ask_delivery`,
or `launch_config.example(...)`), or construct them in-process with your own rclpy context:

    from helpaware_node.ros.examples import AskDelivery, BehaviourLayer, PerceptionStandIn

Everything they say about people is invented.
"""
from .ask_delivery import AskDelivery
from .behaviour_layer import BehaviourLayer
from .perception import PerceptionStandIn

__all__ = ["AskDelivery", "BehaviourLayer", "PerceptionStandIn"]
