"""Password hashing with Argon2id (argon2-cffi defaults, RFC 9106 low-memory profile).

Only hashes are stored.  Nothing here logs, and callers never log a password either.
"""

from __future__ import annotations

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError, VerifyMismatchError

_HASHER = PasswordHasher()

#: Shorter passwords are refused (common practice for an office account; no upper limit).
MIN_PASSWORD_CHARS = 8


def check_strength(password: str) -> str | None:
    """A message saying what is wrong with ``password``, or None when it is acceptable."""
    if len(password) < MIN_PASSWORD_CHARS:
        return f"the password must have at least {MIN_PASSWORD_CHARS} characters"
    if password.strip() == "":
        return "the password must not be only spaces"
    return None


def hash_password(password: str) -> str:
    return _HASHER.hash(password)


def verify_password(stored_hash: str, password: str) -> bool:
    try:
        return _HASHER.verify(stored_hash, password)
    except (VerifyMismatchError, VerificationError, InvalidHashError):
        return False


#: Verified against when the user name is unknown, so a wrong name costs the same time as a wrong password.
DUMMY_HASH = _HASHER.hash("panelwright-no-such-user")
