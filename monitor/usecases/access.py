"""Use cases of access: the optional dashboard password and where the server listens.

The password is never stored or passed on as text: ``drivespan dashboard
--password-file FILE`` reads it, keeps only a salted scrypt hash (RFC 7914; Python's
``hashlib.scrypt``) and hands the hash to the dashboard's server in the environment
variable :data:`PASSWORD_HASH_ENV`. The dashboard asks for the password before it
shows any page and compares in constant time (``hmac.compare_digest``).

This is one shared password for a small team on a trusted network: no user names, no
lock-out after failed tries, no encryption of the traffic. For more, put the dashboard
behind a reverse proxy with real authentication and TLS (README, "Security").
"""

from __future__ import annotations

import hashlib
import hmac
import ipaddress
import os
from pathlib import Path

from monitor.domain.errors import DomainError

PASSWORD_HASH_ENV = "DRIVESPAN_DASHBOARD_PASSWORD_HASH"
"""Environment variable that carries the password hash to the dashboard's server."""

SCRYPT_N, SCRYPT_R, SCRYPT_P = 2**14, 8, 1
"""scrypt cost parameters (RFC 7914, section 2: N = 2^14, r = 8, p = 1 is the common
interactive-login setting; about 16 MiB and a few tens of milliseconds per check)."""

SALT_BYTES = 16
MAX_PASSWORD_CHARS = 1024
MIN_PASSWORD_CHARS = 8
"""Shortest accepted dashboard password (common practice, no source)."""


def hash_password(password: str, salt: bytes | None = None) -> str:
    """A salted scrypt hash of ``password``: ``scrypt$N$r$p$<salt hex>$<hash hex>``.

    Parameters
    ----------
    password : str
        The password.
    salt : bytes, optional
        Random salt; a fresh one of :data:`SALT_BYTES` by default.

    Returns
    -------
    str
        The hash and everything needed to check a password against it.
    """
    salt = os.urandom(SALT_BYTES) if salt is None else salt
    digest = _scrypt(password, salt, SCRYPT_N, SCRYPT_R, SCRYPT_P)
    return f"scrypt${SCRYPT_N}${SCRYPT_R}${SCRYPT_P}${salt.hex()}${digest.hex()}"


def verify_password(password: str, stored: str) -> bool:
    """True if ``password`` matches the hash ``stored`` (compared in constant time).

    A malformed ``stored`` value never matches.
    """
    try:
        scheme, n, r, p, salt_hex, digest_hex = stored.split("$")
        if scheme != "scrypt":
            return False
        salt, expected = bytes.fromhex(salt_hex), bytes.fromhex(digest_hex)
        digest = _scrypt(password[:MAX_PASSWORD_CHARS], salt, int(n), int(r), int(p))
    except ValueError:
        return False
    return hmac.compare_digest(digest, expected)


def _scrypt(password: str, salt: bytes, n: int, r: int, p: int) -> bytes:
    return hashlib.scrypt(
        password.encode("utf-8"), salt=salt, n=n, r=r, p=p, maxmem=64 * 2**20, dklen=32
    )


def read_password_file(path: str | Path) -> str:
    """The dashboard password: the first line of the file ``path``, line end removed.

    Raises DomainError when the file cannot be read, or the password is shorter than
    :data:`MIN_PASSWORD_CHARS` or longer than :data:`MAX_PASSWORD_CHARS`.
    """
    path = Path(path)
    try:
        with open(path, encoding="utf-8") as fh:
            first = fh.readline(MAX_PASSWORD_CHARS + 2)
    except (OSError, UnicodeDecodeError) as e:
        raise DomainError(f"cannot read the password file {path}: {e}") from None
    password = first.rstrip("\r\n")
    if not MIN_PASSWORD_CHARS <= len(password) <= MAX_PASSWORD_CHARS:
        raise DomainError(
            f"the password in {path} must be {MIN_PASSWORD_CHARS} to {MAX_PASSWORD_CHARS} "
            "characters on the first line"
        )
    return password


def is_loopback(host: str) -> bool:
    """True if ``host`` only listens on this machine (127.0.0.0/8, ::1, ``localhost``)."""
    if host.strip().lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip().strip("[]")).is_loopback
    except ValueError:
        return False  # a host name: it may resolve to any interface
