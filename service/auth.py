"""Optional API-key authentication.

Off unless keys are configured, so the embedded run (``uvdose serve`` on a laptop) needs
no set-up. Keys come from either or both of

* ``UVDOSE_API_KEYS`` — comma-separated keys, and
* ``UVDOSE_API_KEYS_FILE`` — a file (typically a mounted secret), one entry per line;
  blank lines and lines starting with ``#`` are ignored. An entry is either a plain
  key or ``sha256:<64 hex digits>``, the SHA-256 of the key (FIPS 180-4), so the
  file need not hold the keys themselves.

Both settings are parsed with the others by :mod:`service.config`. Keys are kept in
memory only as SHA-256 digests. A presented key is hashed and compared with every
stored digest by :func:`hmac.compare_digest` (constant time per comparison, and all
digests are compared, so timing does not tell which or how many matched).

Clients send the key in ``X-API-Key: <key>`` or ``Authorization: Bearer <key>``
(RFC 6750 header form). A request without a key, or with a wrong one, gets
``401`` as RFC 9457 problem details with a ``WWW-Authenticate`` header. The probe,
scrape and documentation routes stay open (:data:`OPEN_PATHS`) so orchestrators and
Prometheus need no key; they expose no computed data.

A configured key file that is missing, unreadable, malformed or empty is an error at
start-up: a typo in a secret mount must not leave the service silently open.
The outcome of each check is left in ``flask.g.uvdose_auth`` for the request log;
keys and headers are never logged.
"""
from __future__ import annotations

import hashlib
import hmac
import re
from dataclasses import dataclass
from pathlib import Path

from flask import Flask, g, request

from uvdose.service.config import ConfigurationError
from uvdose.service.problems import TYPE_PREFIX, problem_response

OPEN_PATHS = frozenset({"/livez", "/readyz", "/metrics", "/openapi.yaml", "/docs", "/docs/style.css",
                        "/docs/page.js"})
API_KEY_HEADER = "X-API-Key"
HASH_PREFIX = "sha256:"
_HEX_DIGEST = re.compile(r"[0-9a-fA-F]{64}")
_BEARER = re.compile(r"Bearer[ \t]+(\S+)[ \t]*", re.IGNORECASE)


class ApiKeyConfigError(ConfigurationError):
    """The configured key list or key file cannot be used."""


def key_digest(key: str) -> bytes:
    """SHA-256 digest of an API key (UTF-8)."""
    return hashlib.sha256(key.encode("utf-8")).digest()


def parse_key_entries(lines, origin: str) -> list[bytes]:
    """Digests for key entries (plain keys or ``sha256:<hex>``); ``origin`` names them in errors."""
    digests = []
    for number, raw in enumerate(lines, start=1):
        entry = raw.strip()
        if not entry or entry.startswith("#"):
            continue
        if entry.lower().startswith(HASH_PREFIX):
            hex_part = entry[len(HASH_PREFIX):]
            if not _HEX_DIGEST.fullmatch(hex_part):
                raise ApiKeyConfigError(
                    f"{origin}, entry {number}: a '{HASH_PREFIX}' entry needs exactly 64 hex digits"
                )
            digests.append(bytes.fromhex(hex_part))
        elif any(c.isspace() for c in entry):
            raise ApiKeyConfigError(f"{origin}, entry {number}: a key may not contain whitespace")
        else:
            digests.append(key_digest(entry))
    return digests


@dataclass(frozen=True)
class KeyRing:
    """The accepted key digests; empty means authentication is off."""

    digests: tuple[bytes, ...]

    @property
    def enabled(self) -> bool:
        return bool(self.digests)

    def accepts(self, presented: str) -> bool:
        candidate = key_digest(presented)
        matched = False
        for digest in self.digests:
            matched |= hmac.compare_digest(candidate, digest)
        return matched


def load_key_ring(app: Flask) -> KeyRing:
    """Read ``UVDOSE_API_KEYS`` and ``UVDOSE_API_KEYS_FILE`` into a :class:`KeyRing`."""
    digests: list[bytes] = []
    inline = app.config["UVDOSE_API_KEYS"]
    if inline:
        digests += parse_key_entries(inline.split(","), "UVDOSE_API_KEYS")
    key_file = app.config["UVDOSE_API_KEYS_FILE"]
    if key_file:
        try:
            text = Path(key_file).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise ApiKeyConfigError(
                f"UVDOSE_API_KEYS_FILE: cannot read {key_file}: {exc.__class__.__name__}"
            ) from None
        from_file = parse_key_entries(text.splitlines(), "UVDOSE_API_KEYS_FILE")
        if not from_file:
            raise ApiKeyConfigError(f"UVDOSE_API_KEYS_FILE: {key_file} holds no keys")
        digests += from_file
    return KeyRing(tuple(digests))


def presented_key() -> str | None:
    """The key the client sent, from ``X-API-Key`` or ``Authorization: Bearer``."""
    key = request.headers.get(API_KEY_HEADER)
    if key:
        return key.strip() or None
    authorization = request.headers.get("Authorization")
    if authorization:
        match = _BEARER.fullmatch(authorization)
        if match:
            return match.group(1)
    return None


def _unauthorized(missing: bool):
    detail = (
        "This service requires an API key: send it in the X-API-Key header or as "
        "'Authorization: Bearer <key>'."
        if missing
        else "The API key sent with this request is not accepted."
    )
    return problem_response(
        401,
        "Unauthorized",
        detail,
        TYPE_PREFIX + "unauthorized",
        headers={"WWW-Authenticate": 'Bearer realm="uvdose"'},
    )


def init_app(app: Flask) -> None:
    """Check the API key on every request except :data:`OPEN_PATHS`, when keys are set."""
    ring = load_key_ring(app)
    app.extensions["uvdose_auth"] = ring

    @app.before_request
    def _check_api_key():
        if not ring.enabled:
            g.uvdose_auth = "off"
            return None
        if request.path in OPEN_PATHS or request.method == "OPTIONS":
            # OPTIONS (CORS preflights among them, which browsers send without the key)
            # reads nothing and computes nothing; see service/cors.py.
            g.uvdose_auth = "open"
            return None
        key = presented_key()
        if key is None:
            g.uvdose_auth = "missing"
            return _unauthorized(missing=True)
        if not ring.accepts(key):
            g.uvdose_auth = "invalid"
            return _unauthorized(missing=False)
        g.uvdose_auth = "ok"
        return None
