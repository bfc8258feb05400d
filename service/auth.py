"""API keys: creation, revocation, verification, and the ``Authorization: Bearer`` check.

A key looks like ``hpk_<id>_<secret>``: ``id`` (12 hex digits) is public and names the key
in listings, logs and the revoke command; ``secret`` (256 random bits) is shown once, when the
key is created, and never stored: the store keeps only a random 16-byte salt and the scrypt
hash of the secret (Percival & Josefsson 2016, RFC 7914; cost n = 2^14, r = 8, p = 1, the
interactive-login setting recommended there). Verification compares hashes in constant time.
Because hashing costs ~0.1 s, a worker remembers a successful verification for five minutes,
keyed by a SHA-256 digest of the presented key held only in its memory; revocation still takes
effect at once because the key's record is read on every request.

Policy (``HEATPATH_AUTH``): ``auto`` requires a key as soon as one active key exists (a fresh
install on loopback is open for the quick start); ``required`` always requires one (the gunicorn
hooks set it when the service listens on a non-loopback address). Health, readiness and metrics
stay open so that load balancers and monitoring can reach them.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import threading
import time
from typing import Any

from flask import Flask, Response, current_app, g, request

from service.errors import ProblemError, problem_response, problem_type
from service.store import Store

KEY_PREFIX = "hpk"
SCRYPT = {"n": 2**14, "r": 8, "p": 1, "dklen": 32}
KDF_LABEL = "scrypt:n=16384,r=8,p=1"
#: Endpoints any caller may use without a key.
OPEN_ENDPOINTS = frozenset({"health.health", "operations.ready", "operations.metrics"})
VERIFIED_TTL_S = 300.0

_verified: dict[str, tuple[str, float]] = {}
_verified_lock = threading.Lock()


class AuthError(ProblemError):
    """401 problem carrying the ``WWW-Authenticate`` challenge (RFC 6750, section 3)."""

    def __init__(self, detail: str, error: str | None = None) -> None:
        super().__init__(401, "unauthenticated", "Authentication required", detail)
        challenge = 'Bearer realm="heatpath"'
        self.headers = {"WWW-Authenticate": challenge + (f', error="{error}"' if error else "")}


def _hash(secret: str, salt: bytes) -> bytes:
    return hashlib.scrypt(secret.encode("utf-8"), salt=salt, **SCRYPT)


def create_key(store: Store, owner: str, requests_per_minute: int | None = None,
               compute_seconds_per_day: float | None = None) -> tuple[str, str]:
    """Create a key for ``owner`` (e.g. ``"A. Person, Some Institute"``); returns ``(key_id, key)``.

    The full key is returned once and never stored. ``None`` limits mean the service defaults.
    """
    if not owner.strip():
        raise ValueError("the owner label must not be empty")
    key_id, secret, salt = secrets.token_hex(6), secrets.token_urlsafe(32), secrets.token_bytes(16)
    record = {
        "owner": owner.strip(), "salt": salt.hex(), "hash": _hash(secret, salt).hex(), "kdf": KDF_LABEL,
        "created_at": time.time(), "revoked_at": None,
        "requests_per_minute": requests_per_minute, "compute_seconds_per_day": compute_seconds_per_day,
    }
    if not store.create("key", key_id, record):
        raise RuntimeError("key id collision; try again")
    _count_active(store, +1)
    return key_id, f"{KEY_PREFIX}_{key_id}_{secret}"


def _count_active(store: Store, step: int) -> None:
    if store.get("meta", "keys") is None:
        store.create("meta", "keys", {"active": 0})
    store.modify("meta", "keys", lambda d: {**d, "active": max(0, d["active"] + step)})


def has_active_keys(store: Store) -> bool:
    """True when at least one key has been created and not revoked."""
    found = store.get("meta", "keys")
    return bool(found and found[0]["active"] > 0)


def public_record(key_id: str, record: dict[str, Any]) -> dict[str, Any]:
    """A key's record without its salt and hash (what listings show)."""
    return {"id": key_id, **{k: v for k, v in record.items() if k not in ("salt", "hash", "kdf")}}


def list_keys(store: Store) -> list[dict[str, Any]]:
    """Every key ever created (revoked ones included, with ``revoked_at``)."""
    return [public_record(i, d) for i, d, _ in store.scan("key")]


def revoke_key(store: Store, key_id: str) -> bool:
    """Revoke a key; False if no such key or already revoked."""
    changed = store.modify("key", key_id, lambda d: None if d["revoked_at"] else {**d, "revoked_at": time.time()})
    if changed is None:
        return False
    _count_active(store, -1)
    return True


def verify(store: Store, token: str) -> tuple[str, dict[str, Any]] | None:
    """``(key_id, record)`` of a valid, unrevoked key, else None."""
    parts = token.split("_", 2)
    if len(parts) != 3 or parts[0] != KEY_PREFIX or not parts[1] or not parts[2]:
        return None
    key_id, secret = parts[1], parts[2]
    found = store.get("key", key_id)
    if found is None or found[0]["revoked_at"]:
        return None
    record = found[0]
    digest = hashlib.sha256(token.encode("utf-8")).hexdigest()
    with _verified_lock:
        cached = _verified.get(digest)
    if cached and cached[0] == key_id and cached[1] > time.monotonic():
        return key_id, record
    if not hmac.compare_digest(_hash(secret, bytes.fromhex(record["salt"])).hex(), record["hash"]):
        return None
    with _verified_lock:
        if len(_verified) > 1024:
            _verified.clear()
        _verified[digest] = (key_id, time.monotonic() + VERIFIED_TTL_S)
    return key_id, record


def auth_required(store: Store) -> bool:
    """Whether requests must present a key under the current policy."""
    return current_app.config["HEATPATH_AUTH"] == "required" or has_active_keys(store)


def authenticate() -> None:
    """``before_request`` hook: set ``g.key_id`` / ``g.key`` or refuse with 401."""
    from service.infrastructure import current

    g.key_id, g.key = None, None
    if request.routing_exception is not None or request.endpoint in OPEN_ENDPOINTS:
        return
    store = current().store
    header = request.headers.get("Authorization", "")
    if not header:
        if auth_required(store):
            raise AuthError("this service requires an API key: send 'Authorization: Bearer <key>'")
        return
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        raise AuthError("the Authorization header must be 'Bearer <key>'", "invalid_request")
    found = verify(store, token.strip())
    if found is None:
        raise AuthError("the API key is not valid (unknown, mistyped or revoked)", "invalid_token")
    g.key_id, g.key = found


def _auth_problem(exc: AuthError) -> Response:
    return problem_response(exc.status, exc.title, exc.detail, problem_type(exc.slug), headers=exc.headers)


def init_app(app: Flask) -> None:
    """Install the key check (before the rate limiter, which counts per key)."""
    app.before_request(authenticate)
    app.register_error_handler(AuthError, _auth_problem)
