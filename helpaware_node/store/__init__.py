"""Persistence of outcome events and belief snapshots."""
