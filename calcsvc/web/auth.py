"""Bearer-token checks for writes (and for reads when the server is configured to protect them)."""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any, TypeVar

from flask import current_app, g, request

from calcsvc.data.database import Database
from calcsvc.data.tokens import Identity, identify
from calcsvc.web.problems import Problem

F = TypeVar("F", bound=Callable[..., Any])

_CHALLENGE = {"WWW-Authenticate": 'Bearer realm="calcsvc"'}


def database() -> Database:
    """The application's database; its sessions are ``database().transaction()``."""
    return current_app.extensions["calcsvc.db"]  # type: ignore[no-any-return]


def _token() -> str | None:
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if scheme.lower() != "bearer" or not token.strip():
        return None
    return token.strip()


def require_role(role: str) -> Identity:
    """The caller's identity; 401 without a valid token, 403 when the token's role is not enough."""
    token = _token()
    if token is None:
        raise Problem(401, "this request needs an 'Authorization: Bearer <token>' header", headers=_CHALLENGE)
    with database().transaction() as session:
        identity = identify(session, token)
    if identity is None:
        raise Problem(401, "the bearer token is not valid (revoked or mistyped)", headers=_CHALLENGE)
    if not identity.may(role):
        raise Problem(403, f"this action needs the '{role}' role; token '{identity.name}' is '{identity.role}'")
    return identity


def require_reader() -> None:
    if current_app.config["READ_REQUIRES_TOKEN"]:
        require_role("editor")


def guard_reads(blueprint: Any) -> None:
    """Every route of ``blueprint`` reads the parts table, so it follows the server's read protection."""
    blueprint.before_request(require_reader)


def requires(role: str) -> Callable[[F], F]:
    """Check the token before the body is parsed, so a caller without rights learns that first.

    The caller's identity is left in ``g.identity``.
    """

    def decorate(view: F) -> F:
        @functools.wraps(view)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            g.identity = require_role(role)
            return view(*args, **kwargs)

        return wrapper  # type: ignore[return-value]

    return decorate


def reads(view: F) -> F:
    """Reads are open unless the server is configured to require a token for them."""

    @functools.wraps(view)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        require_reader()
        return view(*args, **kwargs)

    return wrapper  # type: ignore[return-value]
