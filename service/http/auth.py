"""Optional API keys: ``Authorization: Bearer <key>`` checked against SHA-256 digests.

The settings hold only digests, never keys.  Every configured digest is
compared (with :func:`hmac.compare_digest`) on every request, so the time
taken does not reveal which digest, if any, matched or how much of it did.
"""

from __future__ import annotations

import hashlib
import hmac
from collections.abc import Sequence

from starlette.requests import Request

from service.contract.errors import ProblemError

UNAUTHORIZED_HEADERS = {"WWW-Authenticate": 'Bearer realm="bandwise"'}


def hash_key(key: str) -> str:
    """The hex SHA-256 digest to put in ``BANDWISE_API_KEYS`` for ``key``."""
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


class KeyChecker:
    """Check bearer tokens against configured digests."""

    def __init__(self, digests: Sequence[str]) -> None:
        self._digests = [bytes.fromhex(d) for d in digests]

    @property
    def enabled(self) -> bool:
        return bool(self._digests)

    def matches(self, token: str) -> bool:
        """True when ``token`` hashes to one of the digests (constant time over all of them)."""
        candidate = hashlib.sha256(_wire_bytes(token)).digest()
        found = False
        for digest in self._digests:
            found |= hmac.compare_digest(candidate, digest)
        return found

    def client_of(self, request: Request) -> str | None:
        """Digest prefix identifying the caller (for rate limits), or None without a key."""
        token = _bearer(request)
        return hashlib.sha256(_wire_bytes(token)).hexdigest()[:16] if token else None

    def check(self, request: Request) -> None:
        """Raise a 401 problem unless the request carries a valid key (no-op when keys are off)."""
        if not self._digests:
            return
        token = _bearer(request)
        if token is None or not self.matches(token):
            # Same answer for a missing header, a wrong scheme and a wrong key.
            raise ProblemError("unauthorized", "A valid API key is required: send Authorization: Bearer <key>.", headers=dict(UNAUTHORIZED_HEADERS))


def _wire_bytes(token: str) -> bytes:
    """The bytes the client sent: header values reach us decoded as latin-1, so a UTF-8 key is re-encoded that way."""
    try:
        return token.encode("latin-1")
    except UnicodeEncodeError:  # not from a header: a key given as text
        return token.encode("utf-8", "surrogatepass")


def _bearer(request: Request) -> str | None:
    header = request.headers.get("authorization")
    if not header:
        return None
    scheme, _, token = header.partition(" ")
    token = token.strip()
    if scheme.lower() != "bearer" or not token:
        return None
    return token
