"""The refusals of the application layer. Each names the fields at fault; the HTTP layer maps each class to one
status (calcsvc.web.problems), the command line and the parts tool print them as they are."""

from __future__ import annotations

from collections.abc import Iterable
from typing import ClassVar

from calcsvc.core.outcome import Violation


def errors_of(violations: Iterable[Violation], prefix: str = "") -> dict[str, list[str]]:
    """The core's violations as messages keyed by field (``prefix`` names where a nested item sits)."""
    errors: dict[str, list[str]] = {}
    for violation in violations:
        errors.setdefault(prefix + violation.field, []).append(violation.message)
    return errors


class ServiceError(Exception):
    """A request the service refuses. ``errors`` maps each offending field (dotted for nested ones) to messages."""

    slug: ClassVar[str] = "validation"

    def __init__(self, detail: str, errors: dict[str, list[str]] | None = None, slug: str | None = None) -> None:
        super().__init__(detail)
        self.detail = detail
        self.errors = errors
        if slug is not None:
            self.slug = slug  # type: ignore[misc]  # a finer kind of the same refusal, e.g. "batch-size"

    @classmethod
    def on(cls, field: str, message: str, slug: str | None = None) -> ServiceError:
        """The refusal of one field, with the field's message as the detail."""
        return cls(message, {field: [message]}, slug)


class InvalidInput(ServiceError):
    """An input is missing, malformed or outside its range."""


class PhysicallyImpossible(ServiceError):
    """Inputs that are each valid but together describe no real circuit (the core's preconditions)."""

    slug = "physically-impossible"

    @classmethod
    def of(cls, violations: Iterable[Violation], prefix: str = "") -> PhysicallyImpossible:
        errors = errors_of(violations, prefix)
        return cls("; ".join(f"{field}: {' '.join(messages)}" for field, messages in errors.items()), errors)


class UnknownPart(ServiceError):
    """A referenced part (or revision) does not exist."""

    slug = "part-not-found"


class WrongPartKind(ServiceError):
    """A referenced part cannot fill the role it was given."""

    slug = "wrong-part-kind"


class RetiredPartReference(ServiceError):
    """A retired part named without a pinned revision."""

    slug = "part-retired"


class TooLarge(ServiceError):
    """More work than one request may ask for (rows, combinations, sweep points)."""

    slug = "too-large"


class MalformedBody(ServiceError):
    """A body that is not the JSON or CSV it claims to be."""

    slug = "malformed-body"
