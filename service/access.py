"""Access control: API keys, organisations (tenants) and roles.

* A key reads ``emf_<key id>.<secret>``: the key id (16 hex digits) is public and
  names the row of ``api_keys``; the secret (32 random bytes, URL-safe base64) is shown
  once, when the key is created (``flask --app service keys create``), and stored only
  as a salted scrypt hash (``hashlib.scrypt``, n=2**14, r=8, p=1: RFC 7914's
  interactive-login parameters), compared with ``hmac.compare_digest``.
* Every request except the open ones (:data:`OPEN_ENDPOINTS`: liveness, readiness,
  metrics, the API description and the published reference-level catalogue) needs
  ``Authorization: Bearer <key>``; a missing, malformed, unknown or revoked key gets a
  401 problem with ``WWW-Authenticate: Bearer`` (RFC 6750, section 3).  The key's row is
  read on every request, so a revoked key is refused at once.
* Role ``read`` may list, read, verify and evaluate without storing; ``submit`` may
  also store assessments and batches (:data:`SUBMIT_ENDPOINTS`); a read key there gets
  403 with ``error="insufficient_scope"``.
* The request's organisation becomes ``g.tenant``; :func:`service.storage.get_session`
  then scopes every query to it, so another organisation's id answers 404, the same as
  a missing one.
* ``AUTH_REQUIRED`` false (``EMF_AUTH_REQUIRED=false``) switches all of this off: single-user
  local use, with today's contract unchanged and rows stored without a tenant.

The scrypt hash costs about 40 ms; a worker remembers, per key id, the SHA-256 of a
secret it has verified, so later requests with the same key cost one indexed read.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import re
import secrets
import threading
from dataclasses import dataclass
from datetime import datetime, timezone

import click
from flask import Flask, current_app, g, request
from flask.cli import AppGroup
from sqlalchemy import select, update
from sqlalchemy.orm import Session

from .errors import ProblemError
from .storage import TENANT_LENGTH, ApiKey, storage_of

ROLES = ("submit", "read")
KEY_PREFIX = "emf_"
REALM = "emf-assess"
SCRYPT = {"n": 2**14, "r": 8, "p": 1, "dklen": 32, "maxmem": 64 * 1024 * 1024}

OPEN_ENDPOINTS = frozenset({"api.healthz", "api.openapi_json", "api.reference_levels",
                            "operations.metrics", "operations.readyz", "static"})
"""Endpoints answered without a key."""

SUBMIT_ENDPOINTS = frozenset({"api.create_assessment", "batches.create_batch"})
"""Endpoints that store something: role ``submit`` only."""

UNAUTHORIZED = "urn:emf-assess:problem:unauthorized"
FORBIDDEN = "urn:emf-assess:problem:forbidden"

_KEY_RE = re.compile(r"^emf_([0-9a-f]{16})\.([A-Za-z0-9_-]{43})$")
_TENANT_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]*$")


@dataclass(frozen=True)
class Caller:
    """Who is calling: the key id, organisation and role."""

    key_id: str
    tenant: str
    role: str


@dataclass(frozen=True)
class NewKey:
    """A key just created: ``token`` is the only copy of the secret."""

    key_id: str
    tenant: str
    role: str
    token: str


def _hash(secret: str, salt: bytes) -> str:
    return hashlib.scrypt(secret.encode("ascii"), salt=salt, **SCRYPT).hex()


def check_tenant(tenant: str) -> str:
    """The organisation name, or ValueError: 1 to 100 characters of letters, digits, ``.``, ``_``, ``-``."""
    if not (isinstance(tenant, str) and 1 <= len(tenant) <= TENANT_LENGTH and _TENANT_RE.match(tenant)):
        raise ValueError(f"An organisation name is 1 to {TENANT_LENGTH} letters, digits, '.', '_' or '-', "
                         f"starting with a letter or digit; instead received {tenant!r}.")
    return tenant


def create_key(session: Session, *, tenant: str, role: str, label: str = "") -> NewKey:
    """Store a new key for ``tenant`` with ``role`` (caller commits); the secret is in the result only."""
    check_tenant(tenant)
    if role not in ROLES:
        raise ValueError(f"A key's role is one of {', '.join(ROLES)}; instead received {role!r}.")
    key_id = secrets.token_hex(8)
    secret = base64.urlsafe_b64encode(secrets.token_bytes(32)).decode("ascii").rstrip("=")
    salt = secrets.token_bytes(16)
    session.add(ApiKey(key_id=key_id, tenant=tenant, role=role, label=label[:200], salt=salt.hex(),
                       secret_hash=_hash(secret, salt), created_at=datetime.now(timezone.utc)))
    session.flush()
    return NewKey(key_id, tenant, role, f"{KEY_PREFIX}{key_id}.{secret}")


def revoke_key(session: Session, key_id: str) -> bool:
    """Mark a key revoked (caller commits); False if there is no such key or it was revoked already."""
    result = session.execute(update(ApiKey).where(ApiKey.key_id == key_id, ApiKey.revoked_at.is_(None))
                             .values(revoked_at=datetime.now(timezone.utc)))
    return result.rowcount == 1


def list_keys(session: Session, tenant: str | None = None) -> list[ApiKey]:
    """Keys (never their secrets), oldest first, of one organisation or all."""
    query = select(ApiKey).order_by(ApiKey.created_at)
    if tenant is not None:
        query = query.where(ApiKey.tenant == tenant)
    return list(session.scalars(query))


class _Verified:
    """Per-process memory of secrets already checked with scrypt: key id -> SHA-256 of the secret."""

    def __init__(self) -> None:
        self._items: dict[str, bytes] = {}
        self._lock = threading.Lock()

    def matches(self, key_id: str, fingerprint: bytes) -> bool:
        with self._lock:
            known = self._items.get(key_id)
        return known is not None and hmac.compare_digest(known, fingerprint)

    def remember(self, key_id: str, fingerprint: bytes) -> None:
        with self._lock:
            if len(self._items) > 10_000:
                self._items.clear()
            self._items[key_id] = fingerprint


_VERIFIED = _Verified()


def authenticate(session: Session, token: str) -> Caller | None:
    """The caller a presented key belongs to; None for a malformed, unknown or revoked key."""
    match = _KEY_RE.match(token)
    if match is None:
        return None
    key_id, secret = match.groups()
    row = session.get(ApiKey, key_id)
    if row is None or row.revoked_at is not None:
        return None
    fingerprint = hashlib.sha256(f"{row.salt}:{row.secret_hash}:{secret}".encode("ascii")).digest()
    if not _VERIFIED.matches(key_id, fingerprint):
        if not hmac.compare_digest(_hash(secret, bytes.fromhex(row.salt)), row.secret_hash):
            return None
        _VERIFIED.remember(key_id, fingerprint)
    return Caller(row.key_id, row.tenant, row.role)


def _session() -> Session:
    return storage_of(current_app).sessionmaker()


def _challenge(detail: str, error: str | None = None) -> ProblemError:
    value = f'Bearer realm="{REALM}"' + (f', error="{error}"' if error else "")
    return ProblemError(401, detail, type_=UNAUTHORIZED, title="Unauthorized", headers=[("WWW-Authenticate", value)])


def _require_key() -> None:
    """``before_request``: authenticate, set ``g.tenant``, check the role (see the module notes)."""
    if not current_app.config["AUTH_REQUIRED"] or request.endpoint in OPEN_ENDPOINTS or request.endpoint is None:
        return
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if not header:
        raise _challenge("This request needs an API key: send Authorization: Bearer <key>.")
    if scheme.lower() != "bearer" or not token.strip():
        raise _challenge("The Authorization header must read 'Bearer <key>'.", "invalid_request")
    with _session() as session, session.begin():  # its own short transaction, before the view's
        caller = authenticate(session, token.strip())
    if caller is None:
        raise _challenge("The API key is not valid (unknown, revoked or malformed).", "invalid_token")
    if request.endpoint in SUBMIT_ENDPOINTS and caller.role != "submit":
        raise ProblemError(403, "This API key may read but not submit; use a key with role 'submit'.",
                           type_=FORBIDDEN, title="Forbidden",
                           headers=[("WWW-Authenticate", f'Bearer realm="{REALM}", error="insufficient_scope"')])
    g.caller, g.tenant = caller, caller.tenant


def current_tenant() -> str | None:
    """The organisation of the current request (None with access control off)."""
    return g.get("tenant")


# --------------------------------------------------------------------------- command line

keys_cli = AppGroup("keys", help="Create, revoke and list API keys.")


@keys_cli.command("create")
@click.option("--tenant", required=True, help="Organisation the key belongs to.")
@click.option("--role", required=True, type=click.Choice(ROLES), help="submit (store and read) or read.")
@click.option("--label", default="", help="What the key is for (shown by 'keys list').")
def create_command(tenant: str, role: str, label: str) -> None:
    """Create a key and print it once (it is stored only as a hash)."""
    try:
        check_tenant(tenant)
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="--tenant") from None
    with _session() as session, session.begin():
        key = create_key(session, tenant=tenant, role=role, label=label)
    click.echo(f"Created key {key.key_id} for organisation {key.tenant!r}, role {key.role}.", err=True)
    click.echo("The key is shown once; store it now:", err=True)
    click.echo(key.token)


@keys_cli.command("revoke")
@click.argument("key_id")
def revoke_command(key_id: str) -> None:
    """Revoke a key by its id (the 16 hex digits after 'emf_'); refused from the next request on."""
    with _session() as session, session.begin():
        done = revoke_key(session, key_id)
    if not done:
        raise click.ClickException(f"No active key with id {key_id!r}.")
    click.echo(f"Revoked key {key_id}.")


@keys_cli.command("list")
@click.option("--tenant", default=None, help="Only this organisation's keys.")
def list_command(tenant: str | None) -> None:
    """List keys: id, organisation, role, created, revoked, label (never secrets)."""
    with _session() as session, session.begin():
        for k in list_keys(session, tenant):
            revoked = k.revoked_at.isoformat(timespec="seconds") if k.revoked_at else "-"
            click.echo(f"{k.key_id}\t{k.tenant}\t{k.role}\t{k.created_at.isoformat(timespec='seconds')}\t"
                       f"{revoked}\t{k.label}")


def init_app(app: Flask) -> None:
    """Register the key check (before every request) and the ``keys`` command group."""
    app.before_request(_require_key)
    app.cli.add_command(keys_cli)
