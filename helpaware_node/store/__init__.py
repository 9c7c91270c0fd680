"""Persistence of outcome events and belief snapshots."""
from .base import BeliefStore, MemoryStore, StoredEvent, person_key


def open_store(path: str = "", robot_id: str = "robot") -> BeliefStore:
    """The store the node uses: in memory when `path` is empty."""
    return MemoryStore()


__all__ = ["BeliefStore", "MemoryStore", "StoredEvent", "person_key", "open_store"]
