"""calcsvc: one vetted calculation source for small analog-plus-switching circuits."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from flask import Flask


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the Flask app; imported lazily so ``calcsvc.core`` can be used without Flask installed."""
    from calcsvc.web.app import create_app as build

    return build(config)
