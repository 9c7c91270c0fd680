"""A fixed site key written where the store looks for it.

A fixed site key written where the store looks for it, for tests that start stores or nodes on
files (one writer for all of them).
"""
from __future__ import annotations

import os
from pathlib import Path


def write_site_key(directory, key: bytes) -> Path:
    """`<directory>/site_key`, owner-only from the start, as the store demands."""
    path = Path(directory) / "site_key"
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    try:
        os.write(fd, key)
    finally:
        os.close(fd)
    return path
