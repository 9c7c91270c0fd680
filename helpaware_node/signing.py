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

r"""Signatures on fleet and privacy documents: key derivation, canonical encoding, HMAC (no rclpy).

Every document a robot or the operator console publishes on the fleet or the privacy topic
carries three fields besides its own:

  site    the site id: 16 hex digits of the fingerprint of the person-id key
          (store.keys.key_fingerprint), so a document of another site is told apart
  key_id  which signing key signed it (16 hex digits, derived from the key; reveals nothing)
  sig     HMAC-SHA256, as 64 lowercase hex digits, over `canonical_bytes(document)`: the whole
          document, `site` and `key_id` included, without `sig` itself

The signing key is never the key that hashes person ids: it is derived with HKDF-SHA256
(RFC 5869) from the site key file's signing root under a purpose label, and so is the key id:

  signing key = HKDF(IKM = signing root, salt = "",
                     info = "helpaware fleet signing key v2", L = 32)
  key id      = HKDF(IKM = signing root, salt = "", info = "helpaware fleet key id v2", L = 8)

Until a site first rotates its signing key the signing root is the site key itself (one secret
file does both jobs, through two different keys); see store/keys.py and docs/security.md.

Canonical encoding (one byte string per JSON value; self-delimiting, so unambiguous):

  document = b"helpaware signed document v2\n" + value(the object without "sig")
  null  -> b"n"              true -> b"T"           false -> b"F"
  number-> b"d" + IEEE 754 binary64, big-endian     (JSON has one number type: 1 and 1.0 are
                                                     the same number; -0 is written as 0)
  string-> b"s" + u32 length + UTF-8 bytes
  array -> b"l" + u32 count + each value
  object-> b"o" + u32 count + for each name in UTF-8 byte order: string(name) + value(member)

u32 is a 4-byte big-endian unsigned integer.  A number that no binary64 holds exactly (an
integer beyond 2^53 that is not a multiple of its spacing, or one too large for a double),
NaN, infinities, lone surrogates and nesting deeper than MAX_DEPTH are refused by field.
"""
from __future__ import annotations

from dataclasses import dataclass
import hashlib
import hmac
import math
import re
import struct
from typing import Any, Mapping, Optional

from .core.model import CoreInputError

DOCUMENT_PREFIX = b"helpaware signed document v2\n"
SIGNING_LABEL = b"helpaware fleet signing key v2"
KEY_ID_LABEL = b"helpaware fleet key id v2"
SITE_FIELD, KEY_ID_FIELD, SIG_FIELD = "site", "key_id", "sig"
SIGNATURE_FIELDS = (SITE_FIELD, KEY_ID_FIELD, SIG_FIELD)
MAX_DEPTH = 16
_HEX16 = re.compile(r"^[0-9a-f]{16}$")
_HEX64 = re.compile(r"^[0-9a-f]{64}$")

# why a signed document was refused (counted per reason in /diagnostics)
UNSIGNED = "unsigned"            # no sig field at all
OTHER_SITE = "other_site"        # signed for another site (another site key)
UNKNOWN_KEY = "unknown_key"      # this site, but a signing key this robot does not hold
EXPIRED_KEY = "expired_key"      # the previous signing key, after its window ended
BAD_SIGNATURE = "bad_signature"  # the MAC does not match: tampered, damaged or forged


class Refused(CoreInputError):
    """A document refused for its signature; `reason` is one of the constants above."""

    def __init__(self, reason: str, message: str) -> None:
        super().__init__(message)
        self.reason = reason


class CanonicalError(CoreInputError):
    """A value the canonical encoding cannot hold (the message names the field)."""


# ---------------------------------------------------------------------------- derivation
def hkdf_sha256(ikm: bytes, info: bytes, length: int = 32, salt: bytes = b"") -> bytes:
    """HKDF-SHA256, RFC 5869: extract (an empty salt is HashLen zeros), then expand."""
    if not 0 < length <= 255 * 32:
        raise ValueError(f"length: {length} must be in [1, {255 * 32}]")
    prk = hmac.new(salt or bytes(32), ikm, hashlib.sha256).digest()
    out, block = b"", b""
    for counter in range(1, -(-length // 32) + 1):
        block = hmac.new(prk, block + info + bytes([counter]), hashlib.sha256).digest()
        out += block
    return out[:length]


# ---------------------------------------------------------------------------- encoding
def canonical_bytes(document: Mapping[str, Any]) -> bytes:
    """Return the bytes the signature covers: the document without its `sig` field."""
    if not isinstance(document, Mapping):
        raise CanonicalError("document: expected a JSON object")
    body = {k: v for k, v in document.items() if k != SIG_FIELD}
    out = bytearray(DOCUMENT_PREFIX)
    _put(out, body, "", 0)
    return bytes(out)


def _u32(n: int) -> bytes:
    return struct.pack(">I", n)


def _field(path: str) -> str:
    return f"field {path!r}" if path else "document"


def _child(path: str, name: str) -> str:
    """Return the path of field `name` under `path`.

    Never empty: a field named "" is shown as '""', so a reason names it and not the document.
    """
    label = name[:40] if name else '""'
    return f"{path}.{label}" if path else label


def _text(value: str, path: str) -> bytes:
    try:
        return value.encode("utf-8")
    except UnicodeEncodeError:
        raise CanonicalError(f"{_field(path)}: not valid Unicode text (a lone "
                             "surrogate)") from None


def _number(value, path: str) -> float:
    try:
        x = float(value)
    except OverflowError:
        raise CanonicalError(f"{_field(path)}: {str(value)[:24]}... is beyond any finite "
                             "number") from None
    if not math.isfinite(x):
        raise CanonicalError(f"{_field(path)}: {value!r} is not a finite number")
    if isinstance(value, int) and x != value:
        raise CanonicalError(f"{_field(path)}: the integer {str(value)[:24]} has no exact "
                             "binary64 value; send it as a decimal number")
    return x + 0.0          # -0.0 becomes 0.0: the same JSON number


def _put(out: bytearray, value: Any, path: str, depth: int) -> None:
    if depth > MAX_DEPTH:
        raise CanonicalError(f"{_field(path)}: nested deeper than {MAX_DEPTH} levels")
    if value is None:
        out += b"n"
    elif value is True:
        out += b"T"
    elif value is False:
        out += b"F"
    elif isinstance(value, (int, float)):
        out += b"d" + struct.pack(">d", _number(value, path))
    elif isinstance(value, str):
        raw = _text(value, path)
        out += b"s" + _u32(len(raw)) + raw
    elif isinstance(value, (list, tuple)):
        out += b"l" + _u32(len(value))
        for i, item in enumerate(value):
            _put(out, item, f"{path}[{i}]", depth + 1)
    elif isinstance(value, Mapping):
        names = []
        for name in value:
            if not isinstance(name, str):
                raise CanonicalError(f"{_field(path)}: field name {name!r} is not text")
            names.append((_text(name, _child(path, name)), name))
        out += b"o" + _u32(len(names))
        for raw, name in sorted(names):
            out += b"s" + _u32(len(raw)) + raw
            _put(out, value[name], _child(path, name), depth + 1)
    else:
        raise CanonicalError(f"{_field(path)}: {type(value).__name__} is not a JSON value")


# ---------------------------------------------------------------------------- keys
@dataclass(frozen=True)
class SigningKey:
    """One derived signing key and its public id."""

    key: bytes
    key_id: str

    @classmethod
    def derive(cls, root: bytes) -> "SigningKey":
        if len(root) < 16:
            raise ValueError("signing root: at least 16 bytes")
        return cls(hkdf_sha256(root, SIGNING_LABEL), hkdf_sha256(root, KEY_ID_LABEL, 8).hex())

    def mac(self, document: Mapping[str, Any]) -> str:
        return hmac.new(self.key, canonical_bytes(document), hashlib.sha256).hexdigest()

    def __repr__(self) -> str:      # never print the key itself
        return f"SigningKey(key_id={self.key_id!r})"


@dataclass(frozen=True)
class KeyRing:
    """The keys a robot signs with and accepts.

    The current one, and for a stated window the previous one (a rotation, docs/security.md).
    Times are seconds since the epoch (UTC).
    """

    site_id: str
    current: SigningKey
    previous: Optional[SigningKey] = None
    previous_until_s: float = 0.0

    def sign(self, document: Mapping[str, Any]) -> dict:
        """Return a copy of `document` with site, key_id and sig (any old signature replaced)."""
        doc = {k: v for k, v in document.items() if k not in SIGNATURE_FIELDS}
        doc[SITE_FIELD] = self.site_id
        doc[KEY_ID_FIELD] = self.current.key_id
        doc[SIG_FIELD] = self.current.mac(doc)
        return doc

    def check(self, document: Mapping[str, Any], now_s: float, what: str = "document") -> str:
        """Raise Refused unless the document is signed by a key this ring accepts at `now_s`.

        Returns the key id that signed it.
        """
        sig = document.get(SIG_FIELD)
        if sig is None:
            raise Refused(UNSIGNED, f"{what}: unsigned (no sig field); only documents signed "
                          "with the site key are taken")
        site = document.get(SITE_FIELD)
        if not isinstance(site, str) or not _HEX16.match(site):
            raise Refused(BAD_SIGNATURE, f"{what}: site must be 16 lowercase hex digits")
        if site != self.site_id:
            raise Refused(OTHER_SITE, f"{what}: signed for site {site}, this is site "
                          f"{self.site_id} (another site key file)")
        key_id = document.get(KEY_ID_FIELD)
        if not isinstance(key_id, str) or not _HEX16.match(key_id):
            raise Refused(BAD_SIGNATURE, f"{what}: key_id must be 16 lowercase hex digits")
        key = self._key_for(key_id, now_s, what)
        if not isinstance(sig, str) or not _HEX64.match(sig):
            raise Refused(BAD_SIGNATURE, f"{what}: sig must be 64 lowercase hex digits")
        try:
            mac = key.mac(document)
        except CanonicalError as exc:
            raise CanonicalError(f"{what}: {exc}") from None
        if not hmac.compare_digest(mac, sig):
            raise Refused(BAD_SIGNATURE, f"{what}: sig does not match the document (changed on "
                          f"the way, or forged without the site key); key {key_id}")
        return key_id

    def _key_for(self, key_id: str, now_s: float, what: str) -> SigningKey:
        if key_id == self.current.key_id:
            return self.current
        if self.previous is not None and key_id == self.previous.key_id:
            if now_s <= self.previous_until_s:
                return self.previous
            raise Refused(EXPIRED_KEY, f"{what}: key_id {key_id} is the previous signing "
                          f"key, accepted only until {utc_text(self.previous_until_s)}; give "
                          "that robot the current site key file")
        raise Refused(UNKNOWN_KEY, f"{what}: key_id {key_id} is a signing key this robot does "
                      f"not hold (it signs with {self.current.key_id}): copy the current site "
                      "key file to every robot of the site")


def utc_text(t_s: float) -> str:
    import datetime
    return datetime.datetime.fromtimestamp(t_s, datetime.timezone.utc).strftime(
        "%Y-%m-%dT%H:%M:%SZ")
