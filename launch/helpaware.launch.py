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

r"""Launch the help-aware decision node (ROS 2 Humble, Jazzy, Kilted; needs launch_ros).

    ros2 launch helpaware_node helpaware.launch.py params_file:=hospital_night.yaml \
        namespace:=ward3
    ros2 launch helpaware_node helpaware.launch.py people_topic:=perception/people respawn:=true

Arguments, executable, parameter file lookup and remaps come from
helpaware_node.ros.launch_config (DECIDER_ARGUMENTS; docs/integration.md lists them), which the
demo and the tests use too. Only launch names that exist in every release named above.
"""
from helpaware_node.ros import launch_config as lc
from launch import LaunchDescription
from launch.actions import DeclareLaunchArgument, OpaqueFunction
from launch.substitutions import LaunchConfiguration
from launch_ros.actions import Node


def _decider(context, *args, **kwargs):
    values = {a.name: LaunchConfiguration(a.name).perform(context) for a in lc.DECIDER_ARGUMENTS}
    return [Node(**lc.decider_from_arguments(values).launch_kwargs(), output="screen")]


def generate_launch_description():
    return LaunchDescription(
        [DeclareLaunchArgument(a.name, default_value=a.default, description=a.description)
         for a in lc.DECIDER_ARGUMENTS]
        + [OpaqueFunction(function=_decider)])
