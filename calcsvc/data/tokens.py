"""Bearer tokens: shown once at creation, stored only as a SHA-256 digest, compared in constant time."""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass
from datetime import UTC, datetime

from sqlalchemy import delete, select
from sqlalchemy.orm import Session

from calcsvc.data.models import ApiToken

ROLES = ("editor", "reviewer")


@dataclass(frozen=True)
class Identity:
    name: str
    role: str

    def may(self, role: str) -> bool:
        """A reviewer may do all an editor may, and approve."""
        return self.role == role or self.role == "reviewer"


def _digest(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def create_token(session: Session, name: str, role: str) -> str:
    if role not in ROLES:
        raise ValueError(f"role must be one of {', '.join(ROLES)}")
    if not name or len(name) > 64:
        raise ValueError("name must be 1 to 64 characters")
    if session.get(ApiToken, name) is not None:
        raise ValueError(f"a token named '{name}' exists; revoke it first")
    # 32 random bytes: a digest without salt is safe because the secret cannot be guessed.
    token = "cs_" + secrets.token_urlsafe(32)
    session.add(ApiToken(name=name, role=role, token_sha256=_digest(token), created_at=datetime.now(UTC)))
    session.flush()
    return token


@dataclass(frozen=True)
class TokenInfo:
    """What may be shown about a token: never the token, which only its holder has."""

    name: str
    role: str
    created_at: datetime


def list_tokens(session: Session) -> list[TokenInfo]:
    rows = session.scalars(select(ApiToken).order_by(ApiToken.name))
    return [TokenInfo(row.name, row.role, row.created_at) for row in rows]


def revoke_token(session: Session, name: str) -> bool:
    return session.execute(delete(ApiToken).where(ApiToken.name == name)).rowcount == 1


def identify(session: Session, token: str) -> Identity | None:
    digest = _digest(token)
    row = session.scalar(select(ApiToken).where(ApiToken.token_sha256 == digest))
    if row is None or not hmac.compare_digest(row.token_sha256, digest):
        return None
    return Identity(row.name, row.role)
