from glob import glob

from setuptools import find_packages, setup

package_name = "helpaware_node"

setup(
    name=package_name,
    version="0.1.0",
    packages=find_packages(exclude=["test", "test.*", "bench"]),
    data_files=[
        ("share/ament_index/resource_index/packages", ["resource/" + package_name]),
        ("share/" + package_name, ["package.xml"]),
        ("share/" + package_name + "/launch", glob("launch/*.py")),
        ("share/" + package_name + "/config", glob("config/*.yaml") + glob("config/*.xml")),
    ],
    # ROS packages come from the ROS install (colcon) or the venv's wheels (requirements.txt)
    install_requires=["setuptools"],
    zip_safe=True,
    maintainer="helpaware_node maintainers",
    maintainer_email="maintainers@helpaware.invalid",
    description="Decide when a service robot asks a nearby person for help, and whom.",
    license="Apache-2.0",
    tests_require=["pytest"],
    entry_points={
        "console_scripts": [
            "helpaware = helpaware_node.cli:main",
            "helpaware_decider = helpaware_node.ros.node:main",
        ],
    },
)
