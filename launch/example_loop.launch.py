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

"""The whole loop on a ROS 2 install.

The decision node with the example stand-ins for perception, the behaviour layer and the ask
delivery (helpaware_node/ros/examples/).

    ros2 launch helpaware_node example_loop.launch.py
    ros2 launch helpaware_node example_loop.launch.py namespace:=robot1 answer:=declined

Every few seconds the behaviour layer opens a help need, the decider decides whom to ask among
the invented people in view, the ask delivery answers, and each node logs its side. Arguments
and command lines come from helpaware_node.ros.launch_config (LOOP_ARGUMENTS).
"""
from helpaware_node.ros import launch_config as lc
from launch import LaunchDescription
from launch.actions import DeclareLaunchArgument, OpaqueFunction
from launch.substitutions import LaunchConfiguration
from launch_ros.actions import Node


def _loop(context, *args, **kwargs):
    values = {a.name: LaunchConfiguration(a.name).perform(context) for a in lc.LOOP_ARGUMENTS}
    return [Node(**spec.launch_kwargs(), output="screen")
            for spec in lc.loop_from_arguments(values)]


def generate_launch_description():
    return LaunchDescription(
        [DeclareLaunchArgument(a.name, default_value=a.default, description=a.description)
         for a in lc.LOOP_ARGUMENTS]
        + [OpaqueFunction(function=_loop)])
