"""The site key: where it lives, how it is created, and the checks before it is used.

The key is 32 random bytes in a file only its owner can read.  Every person key is
HMAC-SHA256(site key, perceived id), so without the file the stored keys cannot be linked
back to anyone.  The store file records a fingerprint of the key (never the key) and refuses
to open under a different one, because mixing keys would split a person into two.
"""
from __future__ import annotations

import hashlib
import os
import stat
from pathlib import Path

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
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    try:
        os.write(fd, key)
        os.fsync(fd)
    finally:
        os.close(fd)
    return key


def load_site_key(path: str | os.PathLike | None = None, create: bool = True) -> bytes:
    """The site key from `path` (default under the ROS home), created if missing and allowed."""
    p = Path(path) if path else default_key_path()
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
    if len(key) < 16:
        raise SiteKeyError(f"site key file {p} holds {len(key)} bytes; expected {KEY_BYTES} "
                           "(a damaged or wrong file)")
    return key


def key_fingerprint(key: bytes) -> str:
    """A value that identifies the key without revealing it (domain-separated hash)."""
    return hashlib.sha256(b"helpaware.site-key-fingerprint\x00" + key).hexdigest()[:32]
