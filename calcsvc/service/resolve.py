"""Turning part references in a request into input values, with the review rules of the parts table."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy.orm import Session

from calcsvc.core.spec import Role
from calcsvc.data.database import Database
from calcsvc.data.part_lookup import REFERENCES, Referenced, look_up
from calcsvc.data.store import PartStore
from calcsvc.data.store_errors import PartNotFound
from calcsvc.service.errors import InvalidInput, RetiredPartReference, UnknownPart, WrongPartKind
from calcsvc.service.safety import supply_cautions


@dataclass
class PartResolver:
    """Looks each distinct (part, revision) up once, however many rows or roles name it: the parts a request names
    are read together in one query, in the caller's transaction, or, given the database, from the process's cache
    after one check that nothing changed (calcsvc.data.part_lookup)."""

    session: Session | Database | None  # None when the request names no part
    cache: dict[tuple[str, int | None], Referenced] = field(default_factory=dict)

    def prefetch(self, references: list[tuple[str, int | None]]) -> None:
        """Read every part in ``references`` in one go; one that does not exist is refused later, by ``part``."""
        wanted = [reference for reference in references if reference not in self.cache]
        if not wanted or self.session is None:
            return
        if isinstance(self.session, Database):
            self.cache.update(REFERENCES.look_up(self.session, wanted))
        else:
            self.cache.update(look_up(self.session, wanted))

    def part(self, role: str, part_id: str, revision: int | None) -> Referenced:
        key = (part_id, revision)
        if key not in self.cache:
            self.prefetch([key])
        if key not in self.cache:
            assert self.session is not None, "a part is named, so the resolver needs a session"
            if isinstance(self.session, Session):
                self.cache[key] = _stored(self.session, role, part_id, revision)
            else:  # only a refusal gets here: the store names what is missing
                with self.session.transaction() as session:
                    self.cache[key] = _stored(session, role, part_id, revision)
        return self.cache[key]


def _stored(session: Session, role: str, part_id: str, revision: int | None) -> Referenced:
    store = PartStore(session)
    try:  # the store names what is missing: the part, or the revision
        found = store.get(part_id) if revision is None else store.get_revision(part_id, revision)
    except PartNotFound as exc:
        field_name = role if revision is None or "revision" not in str(exc) else f"{role}_revision"
        raise UnknownPart.on(field_name, str(exc)) from exc
    return Referenced(found.part_id, found.kind, found.parameters, found.status, found.revision)


@dataclass
class Resolved:
    values: dict[str, Any]
    parts: list[dict[str, Any]]
    warnings: list[str]
    cautions: list[str] = field(default_factory=list)  # standing cautions of the parts used (a supply's kind)


def _references(roles: tuple[Role, ...], body: Mapping[str, Any]) -> list[tuple[str, int | None]]:
    """The (part_id, revision) pairs ``body`` names, where both are of the types a reference takes."""
    found = []
    for role in roles:
        part_id, revision = body.get(role.name), body.get(f"{role.name}_revision")
        if isinstance(part_id, str) and (revision is None or type(revision) is int):
            found.append((part_id, revision))
    return found


def resolve(
    roles: tuple[Role, ...], body: Mapping[str, Any], resolver: PartResolver, alternatives: tuple[Role, ...] = ()
) -> Resolved:
    """Explicit values win over a part's; each referenced part is checked against its role, or against the one of
    ``alternatives`` of the same name that takes the part's kind (the review's switch: an NPN or a MOSFET)."""
    values = {k: v for k, v in body.items() if v is not None}
    parts: list[dict[str, Any]] = []
    warnings: list[str] = []
    resolver.prefetch(_references(roles, body))
    cautions: list[str] = []
    for role in roles:
        part_id = body.get(role.name)
        revision = body.get(f"{role.name}_revision")
        if part_id is None:
            if revision is not None:
                message = f"{role.name}_revision needs {role.name} (the part_id)"
                raise InvalidInput.on(f"{role.name}_revision", message)
            continue
        values.pop(role.name, None)
        values.pop(f"{role.name}_revision", None)
        part = resolver.part(role.name, part_id, revision)
        others = [other for other in alternatives if other.name == role.name]
        role = next((other for other in (role, *others) if other.kind == part.kind), role)
        if part.kind != role.kind:
            kinds = " or a ".join(other.kind for other in (role, *others))
            message = f"part '{part_id}' is a {part.kind}; {role.name} needs a {kinds}"
            raise WrongPartKind.on(role.name, message)
        for parameter, wanted in role.must_have:
            if part.parameters.get(parameter) != wanted:
                message = f"part '{part_id}' has {parameter} {part.parameters.get(parameter)!r}; {wanted!r} is needed"
                raise WrongPartKind.on(role.name, message)
        if part.status == "retired" and revision is None:
            message = f"part '{part_id}' is retired; pin {role.name}_revision to re-run an old design"
            raise RetiredPartReference.on(role.name, message)
        if part.status != "approved":
            warnings.append(f"{role.name} '{part_id}' revision {part.revision} is {part.status}, not approved")
        for parameter, input_name in role.provides:
            if input_name not in values and part.parameters.get(parameter) is not None:
                values[input_name] = part.parameters[parameter]
        if part.kind == "supply":
            cautions += supply_cautions(part.parameters)
        parts.append({"role": role.name, "part_id": part.part_id, "revision": part.revision, "status": part.status})
    if not cautions and any(role.kind == "supply" for role in roles):
        cautions = supply_cautions(values)  # a supply given by its values: a capacity says battery
    return Resolved(values, parts, warnings, cautions)


def resolve_parts(
    database: Database, roles: tuple[Role, ...], body: Mapping[str, Any], alternatives: tuple[Role, ...] = ()
) -> Resolved:
    """``resolve`` from the process's cache of part references, or without touching the database when no part is
    named."""
    named = any(role.name in body or f"{role.name}_revision" in body for role in roles)
    return resolve(roles, body, PartResolver(database if named else None), alternatives)
