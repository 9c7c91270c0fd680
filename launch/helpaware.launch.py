"""Launch the help-aware decision node (ROS 2 installs with launch_ros).

    ros2 launch helpaware_node helpaware.launch.py params_file:=hospital_night.yaml namespace:=ward3
The executable, default parameter file, remaps and the middleware profile come from
helpaware_node.ros.launch_config; `respawn:=true` starts a node that died again at once.
"""
from launch import LaunchDescription
from launch.actions import DeclareLaunchArgument, OpaqueFunction
from launch.substitutions import LaunchConfiguration
from launch_ros.actions import Node

from helpaware_node.ros import launch_config as lc


def _node(context, *args, **kwargs):
    params = LaunchConfiguration("params_file").perform(context)
    respawn = LaunchConfiguration("respawn").perform(context).lower() in ("true", "1")
    return [Node(package=lc.PACKAGE, executable=lc.EXECUTABLE, name=lc.NODE_NAME,
                 namespace=LaunchConfiguration("namespace").perform(context),
                 parameters=[lc.params_file(params)],
                 remappings=[r for r in lc.REMAPS if r[0] != r[1]], output="screen",
                 respawn=respawn, respawn_delay=0.0,
                 # the robot's middleware profile, unless the environment names one
                 additional_env=lc.profile_environment(context.environment))]


def generate_launch_description():
    return LaunchDescription([
        DeclareLaunchArgument("params_file", default_value=lc.DEFAULT_PARAMS_FILE,
                              description="file name in the package config/ or an absolute path"),
        DeclareLaunchArgument("namespace", default_value="", description="node namespace"),
        DeclareLaunchArgument("respawn", default_value="false",
                              description="start the node again at once if it dies "
                                          "(docs/integration.md, Respawn)"),
        OpaqueFunction(function=_node),
    ])
