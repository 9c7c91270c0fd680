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
