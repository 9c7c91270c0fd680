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

from glob import glob

from setuptools import find_packages, setup

package_name = "helpaware_node"
share = "share/" + package_name

setup(
    name=package_name,
    version="0.1.0",
    packages=find_packages(exclude=["test", "test.*", "bench"]),
    # found at run time through the ament index (helpaware_node/package_data.py)
    data_files=[
        ("share/ament_index/resource_index/packages", ["resource/" + package_name]),
        (share, ["package.xml"]),
        (share + "/launch", glob("launch/*.launch.py")),
        (share + "/config", glob("config/*.yaml") + glob("config/fastdds_*.xml")),
        (share + "/config/sros2", glob("config/sros2/*.xml")),
        (share + "/scenarios", glob("scenarios/*.yaml")),
        (share + "/schemas", glob("docs/schemas/*.json")),
    ],
    # ROS packages come from the ROS install (package.xml, rosdep) or the venv's wheels
    # (requirements.txt)
    install_requires=["setuptools"],
    # `pip install .[test]`; tests_require is gone from setuptools (a warning since 72)
    extras_require={"test": ["pytest", "hypothesis", "jsonschema"],
                    "fast": ["orjson"]},
    zip_safe=True,
    maintainer="helpaware_node maintainers",
    maintainer_email="maintainers@helpaware.invalid",
    description="Decide when a service robot asks a nearby person for help, and whom.",
    license="Apache-2.0",
    entry_points={
        "console_scripts": [
            "helpaware = helpaware_node.cli:main",
            "helpaware_decider = helpaware_node.ros.node:main",
            "example_perception = helpaware_node.ros.examples.perception:main",
            "example_behaviour_layer = helpaware_node.ros.examples.behaviour_layer:main",
            "example_ask_delivery = helpaware_node.ros.examples.ask_delivery:main",
        ],
    },
)
