"""What the parts store refuses: each refusal is a ``StoreError`` naming the input at fault, so the HTTP layer can
answer it as a problem and the command line can print it."""

from __future__ import annotations


class StoreError(Exception):
    """Base of the store's refusals; ``field`` names the input at fault where there is one."""

    def __init__(self, message: str, field: str | None = None) -> None:
        super().__init__(message)
        self.field = field


class PartNotFound(StoreError):
    pass


class PartExists(StoreError):
    pass


class StaleRevision(StoreError):
    pass


class SelfApproval(StoreError):
    pass


class PartRetired(StoreError):
    pass


class PartNotRetired(StoreError):
    pass


class NotADraft(StoreError):
    pass


class InvalidPartId(StoreError):
    pass


class InvalidPart(StoreError):
    def __init__(self, errors: dict[str, str]) -> None:
        super().__init__("the part is not valid", next(iter(errors), None))
        self.errors = errors


class DesignNotFound(StoreError):
    pass


class DesignExists(StoreError):
    pass


class DesignRetired(StoreError):
    pass
