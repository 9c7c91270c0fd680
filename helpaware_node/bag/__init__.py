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
