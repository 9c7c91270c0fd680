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

"""The help session: the life of help needs and asks.

Driven alike by the node and the simulator (pure Python, no ROS). See session.py for the events and
rules.
"""
from .memory import PersonMemory
from .ports import DirectWrites, OutcomeWriter, SessionStore, StoreStatus
from .session import HelpSession
from .state import (
                    DecisionOut,
                    Note,
                    OpenNeed,
                    PendingAsk,
                    Seen,
                    SessionInputError,
                    SessionRules,
                    Step,
                    STORE_UNAVAILABLE,
)

__all__ = ["HelpSession", "SessionRules", "SessionStore", "OutcomeWriter", "DirectWrites",
           "StoreStatus", "PersonMemory", "Step", "DecisionOut", "Note", "Seen", "OpenNeed",
           "PendingAsk", "SessionInputError", "STORE_UNAVAILABLE"]
