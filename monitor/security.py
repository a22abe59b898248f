"""The browser workspace's defences that need no web framework: password hashes, random tokens, the sign-in
attempt limit and safe paths for downloads.  Kept apart from the framework so that they are tested alone.

Passwords are hashed with scrypt (Percival & Josefsson 2016, RFC 7914) from Python's standard library,
with a random 16-byte salt and the cost N = 2**15, r = 8, p = 1 (the "interactive logins" figure of
RFC 7914 section 2 is N = 2**14; we take one step more): no extra dependency, and a hash that costs an
attacker memory as well as time.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import secrets
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path, PurePosixPath

SCRYPT_N, SCRYPT_R, SCRYPT_P = 2 ** 15, 8, 1
_SCRYPT_MAXMEM = 64 * 1024 * 1024
MIN_PASSWORD_LENGTH = 10


def _b64(raw: bytes) -> str:
    return base64.b64encode(raw).decode("ascii")


def hash_password(password: str, *, n: int = SCRYPT_N, r: int = SCRYPT_R, p: int = SCRYPT_P) -> str:
    """``scrypt$N$r$p$salt$hash`` (salt and hash base64)."""
    salt = secrets.token_bytes(16)
    digest = hashlib.scrypt(password.encode("utf-8"), salt=salt, n=n, r=r, p=p, maxmem=_SCRYPT_MAXMEM, dklen=32)
    return f"scrypt${n}${r}${p}${_b64(salt)}${_b64(digest)}"


def verify_password(password: str, stored: str) -> bool:
    """True when ``password`` matches the stored hash (constant-time comparison)."""
    try:
        scheme, n, r, p, salt, digest = stored.split("$")
        if scheme != "scrypt":
            return False
        expected = base64.b64decode(digest)
        got = hashlib.scrypt(password.encode("utf-8"), salt=base64.b64decode(salt), n=int(n), r=int(r), p=int(p),
                             maxmem=_SCRYPT_MAXMEM, dklen=len(expected))
    except (ValueError, TypeError):
        return False
    return hmac.compare_digest(got, expected)


def new_token(nbytes: int = 32) -> str:
    """A random token for sessions, CSRF and the one-time opening link (URL-safe)."""
    return secrets.token_urlsafe(nbytes)


def same_token(a: str | None, b: str | None) -> bool:
    return bool(a) and bool(b) and hmac.compare_digest(str(a), str(b))


@dataclass
class _Tries:
    failures: list[float] = field(default_factory=list)
    locked_until: float = 0.0
    lockouts: int = 0


class SignInLimiter:
    """At most ``allowed`` wrong passwords in ``window`` seconds for one login and for one client address;
    then that login (or address) is locked, for ``lock`` seconds doubling with every further lockout (up to
    ``max_lock``).  A right password clears the login's count.  Kept in memory: a restart forgets it."""

    def __init__(self, allowed: int = 5, window: float = 900.0, lock: float = 60.0, max_lock: float = 3600.0,
                 clock=time.monotonic):
        self.allowed, self.window, self.lock, self.max_lock, self.clock = allowed, window, lock, max_lock, clock
        self._tries: dict[str, _Tries] = {}
        self._mutex = threading.Lock()

    def _keys(self, login: str, address: str) -> list[str]:
        return [f"login:{login.strip().lower()}", f"address:{address}"]

    def wait(self, login: str, address: str) -> float:
        """Seconds until this login may try again from this address (0: now)."""
        now = self.clock()
        with self._mutex:
            return max([max(0.0, self._tries[k].locked_until - now) for k in self._keys(login, address)
                        if k in self._tries] or [0.0])

    def failed(self, login: str, address: str) -> None:
        now = self.clock()
        with self._mutex:
            for key in self._keys(login, address):
                tries = self._tries.setdefault(key, _Tries())
                tries.failures = [t for t in tries.failures if now - t < self.window] + [now]
                if len(tries.failures) >= self.allowed:
                    tries.locked_until = now + min(self.max_lock, self.lock * 2 ** tries.lockouts)
                    tries.lockouts += 1
                    tries.failures = []

    def succeeded(self, login: str) -> None:
        with self._mutex:
            self._tries.pop(f"login:{login.strip().lower()}", None)


def safe_file(base: Path, relative: str) -> Path | None:
    """``base/relative`` when it names a file inside ``base``; None for anything else (``..``, an absolute
    path, a backslash, a link leading out of the folder, a missing file)."""
    if not relative or "\\" in relative or "\x00" in relative:
        return None
    parts = relative.split("/")
    if PurePosixPath(relative).is_absolute() or any(p in ("..", ".", "") for p in parts):
        return None
    root = Path(base).resolve()
    target = (root / Path(*parts)).resolve()
    if not target.is_relative_to(root) or not target.is_file():
        return None
    return target
