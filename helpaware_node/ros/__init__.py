"""ROS 2 wiring. The only package that imports rclpy."""
