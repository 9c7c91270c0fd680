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

"""The site key: where it lives, how it is created, and the checks before it is used.

The key is 32 random bytes in a file only its owner can read.  Every person key is
HMAC-SHA256(site key, perceived id), so without the file the stored keys cannot be linked
back to anyone.  The store file records a fingerprint of the key (never the key) and refuses
to open under a different one, because mixing keys would split a person into two.

The same file is the root of the fleet signing key (signing.py derives a different key from
it).  Rotating the signing key (`rotate_signing_key`, `helpaware privacy rotate-signing-key`)
rewrites the file in a text form that keeps the person-id key, so stores, bags and exports
stay valid, and holds a new signing root plus the previous one with the end of its window:

    helpaware site key file v2
    person-ids <hex>
    signing <hex>
    previous-signing <hex> until 2026-03-01T12:00:00Z

A file that does not start with that first line is a key of its own (the first form).
"""
from __future__ import annotations

import calendar
from dataclasses import dataclass
import hashlib
import os
from pathlib import Path
import stat
import time
from typing import Optional, TYPE_CHECKING

if TYPE_CHECKING:
    from ..signing import KeyRing

KEY_BYTES = 32
KEY_FILE_NAME = "site_key"
STORE_FILE_NAME = "beliefs.sqlite3"
_WHITESPACE = b" \t\n\r\x0b\x0c"


class SiteKeyError(RuntimeError):
    """The site key file is missing, unsafe or does not match the store."""


def ros_home() -> Path:
    """ROS_HOME if set, else ~/.ros (the ROS 2 convention for per-user state)."""
    home = os.environ.get("ROS_HOME")
    return Path(home).expanduser() if home else Path.home() / ".ros"


def default_store_dir() -> Path:
    return ros_home() / "helpaware"


def default_store_path() -> Path:
    return default_store_dir() / STORE_FILE_NAME


def default_key_path() -> Path:
    return default_store_dir() / KEY_FILE_NAME


def new_key_bytes() -> bytes:
    """32 random bytes that do not start or end with whitespace.

    Tools that read key files with .strip() then get the same key; this costs under
    0.1 bit of the 256.
    """
    while True:
        key = os.urandom(KEY_BYTES)
        if key[:1] not in _WHITESPACE and key[-1:] not in _WHITESPACE:
            return key


def check_key_file_mode(path: Path) -> None:
    """Refuse a key file that group or others can read or write."""
    if os.name != "posix":
        return
    mode = stat.S_IMODE(path.stat().st_mode)
    if mode & 0o077:
        raise SiteKeyError(
            f"site key file {path} has mode {mode:04o}: group/others can access it. "
            f"Run: chmod 600 {path}")


def create_key_file(path: Path) -> bytes:
    """Write a new key with mode 0o600 from the start (never briefly world-readable)."""
    path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
    key = new_key_bytes()
    write_new_owner_only(path, key)
    return key


def write_new_owner_only(path: Path, data: bytes) -> None:
    """Create `path` (it must not exist) with mode 0o600, write `data` and sync it."""
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        os.write(fd, data)
        os.fsync(fd)
    finally:
        os.close(fd)


def load_site_key(path: str | os.PathLike[str] | None = None, create: bool = True) -> bytes:
    """Return the key that hashes person ids, from `path` (default under the ROS home).

    The file created if missing and allowed.
    """
    return load_site_keys(path, create).person_id_key


def load_site_keys(path: str | os.PathLike[str] | None = None, create: bool = True) -> "SiteKeys":
    """Every key of the site key file at `path` (see the module doc)."""
    p = Path(path) if path else default_key_path()
    return parse_site_key_file(read_key_file(p, create), str(p))


def read_key_file(p: Path, create: bool = True) -> bytes:
    """Return the raw bytes of the key file, created if missing and allowed; checked for mode."""
    try:
        if not p.exists():
            if not create:
                raise SiteKeyError(f"site key file {p} does not exist")
            try:
                return create_key_file(p)
            except FileExistsError:     # another process created it first: use theirs
                pass
        if p.is_dir():
            raise IsADirectoryError(p)
        check_key_file_mode(p)
        key = p.read_bytes()
    except IsADirectoryError:
        raise SiteKeyError(f"site key file {p} is a directory; point the store at the key "
                           f"file itself, or move the directory away") from None
    except PermissionError as exc:
        raise SiteKeyError(f"site key file {p} cannot be read by this user ({exc.strerror}); "
                           f"run the node as the key's owner, or fix ownership with "
                           f"chown <user> {p} (keep mode 600)") from None
    except OSError as exc:
        raise SiteKeyError(f"site key file {p} cannot be read or created: {exc}") from None
    return key


def key_fingerprint(key: bytes) -> str:
    """Return a value that identifies the key without revealing it (domain-separated hash)."""
    return hashlib.sha256(b"helpaware.site-key-fingerprint\x00" + key).hexdigest()[:32]


# ---------------------------------------------------------------------------- signing roots
FILE_HEADER = b"helpaware site key file v2\n"


@dataclass(frozen=True)
class SiteKeys:
    """What a site key file holds.

    `person_id_key` hashes perceived ids and is never rotated in place (that would split every
    person in two); `signing_root` is what the fleet signing key is derived from (the site key
    itself until the first rotation), and the previous root stays accepted until `previous_until_s`
    (seconds since the epoch, UTC).
    """

    person_id_key: bytes
    signing_root: bytes
    previous_signing_root: Optional[bytes] = None
    previous_until_s: float = 0.0
    path: str = ""

    @classmethod
    def single(cls, key: bytes, path: str = "") -> "SiteKeys":
        return cls(key, key, path=path)

    @property
    def site_id(self) -> str:
        """Public name of the site: the start of the person-id key's fingerprint."""
        return key_fingerprint(self.person_id_key)[:16]

    def key_ring(self) -> "KeyRing":
        from ..signing import KeyRing, SigningKey
        previous = (SigningKey.derive(self.previous_signing_root)
                    if self.previous_signing_root is not None else None)
        return KeyRing(self.site_id, SigningKey.derive(self.signing_root), previous,
                       self.previous_until_s)

    def __repr__(self) -> str:      # never print key material
        return f"SiteKeys(site_id={self.site_id!r}, path={self.path!r})"


def parse_site_key_file(raw: bytes, where: str = "site key file") -> SiteKeys:
    """Parse SiteKeys from the bytes of a key file of either form; SiteKeyError names the line."""
    if not raw.startswith(FILE_HEADER):
        if len(raw) < 16:
            raise SiteKeyError(f"site key file {where} holds {len(raw)} bytes; expected "
                               f"{KEY_BYTES} (a damaged or wrong file)")
        return SiteKeys.single(raw, where)
    fields: dict[str, tuple[bytes, float]] = {}
    try:
        lines = raw[len(FILE_HEADER):].decode("ascii").splitlines()
    except UnicodeDecodeError:
        raise SiteKeyError(f"site key file {where}: not ASCII text after its first line") from None
    for n, line in enumerate(lines, start=2):
        words = line.split("#", 1)[0].split()
        if not words:
            continue
        name = words[0]
        if name not in ("person-ids", "signing", "previous-signing") or name in fields:
            raise SiteKeyError(f"site key file {where}, line {n}: {name!r} is unknown or "
                               "repeated (expected person-ids, signing, previous-signing once)")
        want = 4 if name == "previous-signing" else 2
        if len(words) != want or (want == 4 and words[2] != "until"):
            raise SiteKeyError(f"site key file {where}, line {n}: expected '{name} <hex>"
                               + (" until <YYYY-MM-DDTHH:MM:SSZ>'" if want == 4 else "'"))
        try:
            key = bytes.fromhex(words[1])
        except ValueError:
            raise SiteKeyError(f"site key file {where}, line {n}: {name} is not hex") from None
        if len(key) < 16:
            raise SiteKeyError(f"site key file {where}, line {n}: {name} holds {len(key)} "
                               "bytes; at least 16 expected")
        fields[name] = (key, _parse_utc(words[3], where, n) if want == 4 else 0.0)
    for name in ("person-ids", "signing"):
        if name not in fields:
            raise SiteKeyError(f"site key file {where}: no '{name}' line")
    previous = fields.get("previous-signing")
    return SiteKeys(fields["person-ids"][0], fields["signing"][0],
                    previous[0] if previous else None, previous[1] if previous else 0.0, where)


def _parse_utc(text: str, where: str, line: int) -> float:
    try:
        return float(calendar.timegm(time.strptime(text, "%Y-%m-%dT%H:%M:%SZ")))
    except ValueError:
        raise SiteKeyError(f"site key file {where}, line {line}: {text!r} is not a UTC time "
                           "like 2026-03-01T12:00:00Z") from None


def site_key_file_text(keys: SiteKeys) -> bytes:
    """Return the text form of `keys` (see the module doc)."""
    lines = [FILE_HEADER.decode(),
             "# person-ids: hashes perceived ids; keep it as long as the stores made with it\n",
             f"person-ids {keys.person_id_key.hex()}\n",
             f"signing {keys.signing_root.hex()}\n"]
    if keys.previous_signing_root is not None:
        until = time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(keys.previous_until_s))
        lines.append(f"previous-signing {keys.previous_signing_root.hex()} until {until}\n")
    return "".join(lines).encode("ascii")


def rotate_signing_key(path: str | os.PathLike[str], window_s: float, now_s: float | None = None,
                       force: bool = False) -> SiteKeys:
    """Give the site a new signing root; the current one stays accepted for `window_s`.

    The person-id key is kept (stores, bags and exports stay valid).  The file is replaced
    atomically (written beside it owner-only, synced, renamed).  A previous key whose window
    has not ended yet would be dropped: refused unless `force`.
    """
    if not (window_s >= 0 and window_s < 10 * 365 * 86400.0):
        raise SiteKeyError(f"window: {window_s!r} s must be in [0, 10 years)")
    p = Path(path)
    old = parse_site_key_file(read_key_file(p, create=False), str(p))
    now = time.time() if now_s is None else now_s
    if old.previous_signing_root is not None and old.previous_until_s > now and not force:
        raise SiteKeyError(
            f"site key file {p}: the previous signing key is still accepted until "
            f"{time.strftime('%Y-%m-%dT%H:%M:%SZ', time.gmtime(old.previous_until_s))}; a new "
            "rotation now would cut off robots that still sign with it (force to do it anyway)")
    new = SiteKeys(old.person_id_key, new_key_bytes(), old.signing_root,
                   float(int(now + window_s)), str(p))
    write_key_file_atomically(p, site_key_file_text(new))
    return new


def write_key_file_atomically(path: Path, data: bytes) -> None:
    tmp = path.with_name(f".{path.name}.new-{os.getpid()}")
    write_new_owner_only(tmp, data)
    os.replace(tmp, path)
    dir_fd = os.open(path.parent, os.O_RDONLY)
    try:
        os.fsync(dir_fd)
    finally:
        os.close(dir_fd)
