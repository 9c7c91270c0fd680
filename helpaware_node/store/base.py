"""The store interface every backend implements, and the in-memory backend.

The append-only log of outcome events is the source of truth; a person's belief is the fold
(`core.person.fold_events`) of their events in (time, event id) order.  Persons are known only
by `person_key`, an HMAC of the perceived id: raw ids never enter a store.
"""
from __future__ import annotations

import hashlib
import hmac
import os
from dataclasses import dataclass
from typing import Iterable, Protocol

from ..core import Belief, OutcomeEvent, Result, SiteModel, fold_events
from .keys import SiteKeys


@dataclass(frozen=True)
class StoreHealth:
    """For the node's diagnostics: "OK", or "ERROR" with what happened."""

    level: str          # "OK" or "ERROR" (diagnostic_msgs level names)
    message: str = ""


@dataclass(frozen=True)
class StoredEvent:
    """One outcome as stored and shared: hashed person key, never the raw id."""

    event_id: str          # "<robot_id>/<sequence>", unique across the fleet
    person_key: str        # hex HMAC-SHA256 of the perceived id under the site key
    time_s: float          # when the ask was made
    result: Result
    busyness: float        # context at the ask
    ask_load: float
    request_kind: str = ""

    def to_outcome(self) -> OutcomeEvent:
        return OutcomeEvent(self.time_s, self.result, self.busyness, self.ask_load,
                            event_id=self.event_id)


def person_key(site_key: bytes, raw_id: str) -> str:
    """HMAC-SHA256(site_key, raw_id) as hex: stable per site, not reversible without the key."""
    return hmac.new(site_key, raw_id.encode("utf-8"), hashlib.sha256).hexdigest()


class BeliefStore(Protocol):
    """What the node, the tools and the fleet exchange need from a store."""

    def key_for(self, raw_id: str) -> str: ...
    def next_event_id(self) -> str: ...                        # "<robot_id>/<sequence>", never reused
    def append(self, event: StoredEvent) -> bool: ...          # durable on return; False: not stored (duplicate, opted out)
    def events_for(self, key: str) -> list[StoredEvent]: ...
    def keys(self) -> list[str]: ...
    def belief(self, key: str, model: SiteModel) -> tuple[Belief, float | None]: ...
    def is_opted_out(self, key: str) -> bool: ...
    def opt_out(self, key: str) -> None: ...
    def forget(self, key: str) -> int: ...                     # events removed
    def close(self) -> None: ...


class MemoryStore:
    """A store that keeps everything in this process (tests, simulator, no-disk runs)."""

    def __init__(self, site_key: bytes | SiteKeys | None = None, robot_id: str = "robot") -> None:
        if not isinstance(site_key, SiteKeys):
            site_key = SiteKeys.single(site_key if site_key is not None else os.urandom(32))
        self.site_keys = site_key          # hashing key, and the fleet signing roots
        self._site_key = site_key.person_id_key
        self.robot_id = robot_id
        self.health = StoreHealth("OK", "in memory (nothing kept after exit)")
        self._next_seq = 1
        self._events: dict[str, StoredEvent] = {}
        self._by_key: dict[str, list[str]] = {}
        self._opted_out: set[str] = set()

    def key_for(self, raw_id: str) -> str:
        return person_key(self._site_key, raw_id)

    def next_event_id(self) -> str:
        seq, self._next_seq = self._next_seq, self._next_seq + 1
        return f"{self.robot_id}/{seq}"

    def append(self, event: StoredEvent) -> bool:
        if event.event_id in self._events or event.person_key in self._opted_out:
            return False
        self._events[event.event_id] = event
        self._by_key.setdefault(event.person_key, []).append(event.event_id)
        return True

    def extend(self, events: Iterable[StoredEvent]) -> int:
        return sum(self.append(e) for e in events)

    def events_for(self, key: str) -> list[StoredEvent]:
        return [self._events[i] for i in self._by_key.get(key, [])]

    def keys(self) -> list[str]:
        return sorted(self._by_key)

    def belief(self, key: str, model: SiteModel) -> tuple[Belief, float | None]:
        return fold_events([e.to_outcome() for e in self.events_for(key)], model)

    def is_opted_out(self, key: str) -> bool:
        return key in self._opted_out

    def opt_out(self, key: str) -> None:
        self._opted_out.add(key)

    def opted_out(self) -> list[str]:
        return sorted(self._opted_out)

    def forget(self, key: str) -> int:
        ids = self._by_key.pop(key, [])
        for i in ids:
            del self._events[i]
        self._opted_out.discard(key)
        return len(ids)

    def close(self) -> None:
        pass
