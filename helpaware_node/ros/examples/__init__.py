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
