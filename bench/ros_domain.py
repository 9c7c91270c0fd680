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

"""A ROS domain id of the benchmark's own, so a test run on the same machine never shares it.

Not a benchmark itself (run_all.py runs bench_*.py only).  The same lock-file scheme as
test/conftest.py: each run holds an exclusive lock on `helpaware-ros-domain-<id>.lock` in the
temporary directory for as long as it lives.
"""
from __future__ import annotations

import fcntl
import os
import random
import tempfile

_HELD: list = []


def claim_domain_id() -> str:
    """Return a free id in the Linux-safe range 1-101 (the first one locked by nobody else)."""
    ids = list(range(1, 102))
    random.SystemRandom().shuffle(ids)
    for domain_id in ids:
        handle = open(os.path.join(tempfile.gettempdir(),
                                   f"helpaware-ros-domain-{domain_id}.lock"), "a")
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            handle.close()
            continue
        _HELD.append(handle)   # held until this process exits
        return str(domain_id)
    return str(ids[0])


def loopback_own_domain() -> None:
    """DDS on loopback only, in a domain of this run's own (unless the caller set one)."""
    os.environ["ROS_AUTOMATIC_DISCOVERY_RANGE"] = "LOCALHOST"
    os.environ.pop("ROS_LOCALHOST_ONLY", None)
    os.environ["ROS_DOMAIN_ID"] = os.environ.get("ROS_DOMAIN_ID") or claim_domain_id()
