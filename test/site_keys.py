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
