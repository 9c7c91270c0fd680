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

"""Walk a JSON document's fields and replace one of them.

Shared by the wire and node fuzz tests.
"""
import copy


def field_paths(value, prefix=(), items_per_list=None):
    """Every path into `value` (the root included); lists up to `items_per_list` items."""
    yield prefix
    if isinstance(value, dict):
        for k, v in value.items():
            yield from field_paths(v, prefix + (k,), items_per_list)
    elif isinstance(value, list):
        for i, v in enumerate(value[:items_per_list]):
            yield from field_paths(v, prefix + (i,), items_per_list)


def replaced(doc, path, new):
    """Return a deep copy of `doc` with the field at `path` set to `new` (root: `new`)."""
    if not path:
        return new
    d = copy.deepcopy(doc)
    cur = d
    for p in path[:-1]:
        cur = cur[p]
    cur[path[-1]] = new
    return d
