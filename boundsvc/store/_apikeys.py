"""API-key tokens and secret hashing.

A token is ``bsk_<key id>_<secret>``: the key id (16 hex digits) is public and selects the
row; the secret (``secrets.token_urlsafe(32)``, 256 bits) is checked against a stored hash.

Hash choice: a salted SHA-256 (``sha256$<salt hex>$<digest hex>``), compared in constant
time.  Slow KDFs (scrypt, PBKDF2) protect *low-entropy* passwords against offline
guessing; a 256-bit random secret cannot be guessed whatever the hash speed, while a slow
KDF would add tens of milliseconds of CPU to every authenticated request.  The scheme
prefix lets a future revision switch algorithms without invalidating existing keys.
"""

from __future__ import annotations

import hashlib
import hmac
import re
import secrets

__all__ = ["TOKEN_PREFIX", "hash_secret", "new_token", "parse_token", "verify_secret"]

TOKEN_PREFIX = "bsk"  # noqa: S105 - a public prefix, not a secret
_KEY_ID = re.compile(r"[0-9a-f]{16}")
_SECRET = re.compile(r"[A-Za-z0-9_-]{16,128}")
_SCHEME = "sha256"

#: Hash checked when the key id is unknown, so both paths cost one digest + compare.
_DUMMY_HASH = f"{_SCHEME}${'00' * 16}${'00' * 32}"


def new_token() -> tuple[str, str, str]:
    """Return ``(key_id, secret, token)`` for a fresh random key."""
    key_id = secrets.token_hex(8)
    secret = secrets.token_urlsafe(32)
    return key_id, secret, f"{TOKEN_PREFIX}_{key_id}_{secret}"


def parse_token(token: str) -> tuple[str, str] | None:
    """Split a token into ``(key_id, secret)``; None if it is not well formed."""
    parts = token.split("_", 2)
    if len(parts) != 3 or parts[0] != TOKEN_PREFIX:
        return None
    key_id, secret = parts[1], parts[2]
    if not _KEY_ID.fullmatch(key_id) or not _SECRET.fullmatch(secret):
        return None
    return key_id, secret


def _digest(salt: bytes, secret: str) -> bytes:
    return hashlib.sha256(salt + secret.encode("utf-8")).digest()


def hash_secret(secret: str) -> str:
    """Return the storable salted hash of ``secret``."""
    salt = secrets.token_bytes(16)
    return f"{_SCHEME}${salt.hex()}${_digest(salt, secret).hex()}"


def verify_secret(secret: str, stored: str | None) -> bool:
    """Check ``secret`` against a stored hash in constant time (None: dummy check)."""
    try:
        scheme, salt_hex, digest_hex = (stored or _DUMMY_HASH).split("$")
        salt, expected = bytes.fromhex(salt_hex), bytes.fromhex(digest_hex)
    except ValueError:
        return False
    ok = hmac.compare_digest(_digest(salt, secret), expected)
    return ok and scheme == _SCHEME and stored is not None
