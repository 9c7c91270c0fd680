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

"""rosbag2 bags with the `rosbags` library (no ROS install needed).

The floor that the recorder (ros/), the review (review/) and the fit (fit/) read and write through.
"""
from .reader import BagInfo, BagMessage, BagSource
from .salvage import McapSalvage
from .types import (
                    BAG_FORMAT_VERSION,
                    BagReadError,
                    deserialize_string,
                    DIAGNOSTIC_ARRAY_TYPE,
                    GOAL_STATUS_ARRAY_TYPE,
                    KNOWN_TYPES,
                    MARKER_ARRAY_TYPE,
                    normalise_type,
                    serialize_string,
                    STRING_TYPE,
                    typestore,
)
from .writer import BagWriter

__all__ = ["BAG_FORMAT_VERSION", "DIAGNOSTIC_ARRAY_TYPE", "GOAL_STATUS_ARRAY_TYPE", "KNOWN_TYPES",
           "MARKER_ARRAY_TYPE", "STRING_TYPE", "BagInfo", "BagMessage", "BagReadError",
           "BagSource", "BagWriter", "McapSalvage", "deserialize_string", "normalise_type",
           "serialize_string", "typestore"]
