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
