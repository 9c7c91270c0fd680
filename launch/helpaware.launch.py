"""Launch the help-aware decision node (ROS 2 installs with launch_ros).

    ros2 launch helpaware_node helpaware.launch.py params_file:=hospital_night.yaml namespace:=ward3
The executable, default parameter file and remaps come from helpaware_node.ros.launch_config.
"""
from launch import LaunchDescription
from launch.actions import DeclareLaunchArgument, OpaqueFunction
from launch.substitutions import LaunchConfiguration
from launch_ros.actions import Node

from helpaware_node.ros import launch_config as lc


def _node(context, *args, **kwargs):
    params = LaunchConfiguration("params_file").perform(context)
    return [Node(package=lc.PACKAGE, executable=lc.EXECUTABLE, name=lc.NODE_NAME,
                 namespace=LaunchConfiguration("namespace").perform(context),
                 parameters=[lc.params_file(params)],
                 remappings=[r for r in lc.REMAPS if r[0] != r[1]], output="screen")]


def generate_launch_description():
    return LaunchDescription([
        DeclareLaunchArgument("params_file", default_value=lc.DEFAULT_PARAMS_FILE,
                              description="file name in the package config/ or an absolute path"),
        DeclareLaunchArgument("namespace", default_value="", description="node namespace"),
        OpaqueFunction(function=_node),
    ])
