"""ORM tables. Every change to them ships with an Alembic migration in ``migrations/versions``."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, DateTime, ForeignKey, Index, Integer, String, Text
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column


class Base(DeclarativeBase):
    pass


class Part(Base):
    """The current state of a part: its latest revision and its review status."""

    __tablename__ = "parts"

    part_id: Mapped[str] = mapped_column(String(64), primary_key=True)
    kind: Mapped[str] = mapped_column(String(16), index=True)
    description: Mapped[str] = mapped_column(Text, default="")
    parameters: Mapped[dict[str, Any]] = mapped_column(JSON)
    status: Mapped[str] = mapped_column(String(16), index=True)
    revision: Mapped[int] = mapped_column(Integer)
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    updated_by: Mapped[str] = mapped_column(String(64))
    approved_by: Mapped[str | None] = mapped_column(String(64), nullable=True)


class PartRevision(Base):
    """One immutable revision of a part. Rows are only ever added; approval stamps the row it names."""

    __tablename__ = "part_revisions"

    part_id: Mapped[str] = mapped_column(ForeignKey("parts.part_id"), primary_key=True)
    revision: Mapped[int] = mapped_column(Integer, primary_key=True)
    kind: Mapped[str] = mapped_column(String(16))
    description: Mapped[str] = mapped_column(Text, default="")
    parameters: Mapped[dict[str, Any]] = mapped_column(JSON)
    author: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    approved_by: Mapped[str | None] = mapped_column(String(64), nullable=True)
    approved_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True), nullable=True)


class PartEvent(Base):
    """One thing done to a revision (created, edited, approved, retired, restored, renamed), by whom, when and
    why. Rows are only ever added; the history of a part is its revisions with their events."""

    __tablename__ = "part_events"
    __table_args__ = (Index("ix_part_events_part_revision", "part_id", "revision"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    part_id: Mapped[str] = mapped_column(ForeignKey("parts.part_id"))
    revision: Mapped[int] = mapped_column(Integer)
    action: Mapped[str] = mapped_column(String(16))
    actor: Mapped[str] = mapped_column(String(64))
    at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    reason: Mapped[str | None] = mapped_column(Text, nullable=True)


class Design(Base):
    """The current state of a saved design: its latest revision and whether it is active or retired."""

    __tablename__ = "designs"

    design_id: Mapped[str] = mapped_column(String(64), primary_key=True)
    calculation: Mapped[str] = mapped_column(String(32))
    owner: Mapped[str] = mapped_column(String(64))
    description: Mapped[str] = mapped_column(Text, default="")
    status: Mapped[str] = mapped_column(String(16), index=True)
    revision: Mapped[int] = mapped_column(Integer)
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    updated_by: Mapped[str] = mapped_column(String(64))


class DesignRevision(Base):
    """One immutable revision of a saved design: the request body as given, its inputs as the service read them
    (SI), the part revisions they resolved to and the review at those revisions."""

    __tablename__ = "design_revisions"

    design_id: Mapped[str] = mapped_column(ForeignKey("designs.design_id"), primary_key=True)
    revision: Mapped[int] = mapped_column(Integer, primary_key=True)
    calculation: Mapped[str] = mapped_column(String(32))
    owner: Mapped[str] = mapped_column(String(64))
    description: Mapped[str] = mapped_column(Text, default="")
    body: Mapped[dict[str, Any]] = mapped_column(JSON)
    inputs: Mapped[dict[str, Any]] = mapped_column(JSON)
    parts: Mapped[list[dict[str, Any]]] = mapped_column(JSON)
    review: Mapped[dict[str, Any]] = mapped_column(JSON)
    author: Mapped[str] = mapped_column(String(64))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))


class DesignPart(Base):
    """A part the current revision of a design uses, by role: what finds the designs a part edit touches."""

    __tablename__ = "design_parts"

    design_id: Mapped[str] = mapped_column(ForeignKey("designs.design_id"), primary_key=True)
    role: Mapped[str] = mapped_column(String(32), primary_key=True)
    part_id: Mapped[str] = mapped_column(String(64), index=True)
    revision: Mapped[int] = mapped_column(Integer)


class ApiToken(Base):
    """A bearer token: only its SHA-256 digest is kept."""

    __tablename__ = "api_tokens"

    name: Mapped[str] = mapped_column(String(64), primary_key=True)
    role: Mapped[str] = mapped_column(String(16))
    token_sha256: Mapped[str] = mapped_column(String(64), unique=True)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
