"""A person in view for help-session tests: what perception gives the session."""
from dataclasses import dataclass


@dataclass(frozen=True)
class Person:
    person_id: str
    distance_m: float = 1.0
    busyness: float = 0.0
    activity: str = ""
