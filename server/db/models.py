"""SQLAlchemy 2 table models of the store.

The rows hold exactly the fields of the version-1 project file (:mod:`server.calc.model`),
one table per element, so an import followed by an export gives the same file back.  No
arithmetic lives here: results are computed by :mod:`server.calc` from the model that
:mod:`server.services` builds out of these rows.

``Project.data_version`` goes up by one on every write to the project or anything in it; the
service keys its in-memory calculator on it.  ``Circuit.version`` goes up on every write to
that circuit (optimistic locking of concurrent edits).
"""

from __future__ import annotations

from datetime import UTC, datetime

from sqlalchemy import (
    Boolean,
    DateTime,
    Float,
    ForeignKey,
    Integer,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

NAMING_CONVENTION = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


def utcnow() -> datetime:
    return datetime.now(UTC)


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class Project(Base):
    """A project: header, settings and title block of one job."""

    __tablename__ = "projects"

    id: Mapped[int] = mapped_column(primary_key=True)
    number: Mapped[str] = mapped_column(String(50), default="", index=True)
    name: Mapped[str] = mapped_column(String(200))
    code: Mapped[str] = mapped_column(String(20), default="NEC-2023")
    occupancy: Mapped[str] = mapped_column(String(20), default="office")
    include_future: Mapped[bool] = mapped_column(Boolean, default=False)
    vd_feeder_pct: Mapped[float] = mapped_column(Float, default=3.0)
    vd_total_pct: Mapped[float] = mapped_column(Float, default=5.0)
    imbalance_limit_pct: Mapped[float] = mapped_column(Float, default=10.0)
    growth_margin_pct: Mapped[float] = mapped_column(Float, default=25.0)
    area_ft2: Mapped[float | None] = mapped_column(Float)
    firm: Mapped[str] = mapped_column(String(200), default="")
    client: Mapped[str] = mapped_column(String(200), default="")
    address: Mapped[str] = mapped_column(String(300), default="")
    drawn_by: Mapped[str] = mapped_column(String(20), default="")
    checked_by: Mapped[str] = mapped_column(String(20), default="")
    paper: Mapped[str] = mapped_column(String(30), default="tabloid-landscape")
    archived: Mapped[bool] = mapped_column(Boolean, default=False)
    data_version: Mapped[int] = mapped_column(Integer, default=1)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)

    sources: Mapped[list[Source]] = relationship(
        back_populates="project", cascade="all, delete-orphan", order_by="Source.position"
    )
    transformers: Mapped[list[Transformer]] = relationship(
        back_populates="project", cascade="all, delete-orphan", order_by="Transformer.position"
    )
    panels: Mapped[list[Panel]] = relationship(
        back_populates="project", cascade="all, delete-orphan", order_by="Panel.position"
    )
    revisions: Mapped[list[Revision]] = relationship(
        back_populates="project", cascade="all, delete-orphan", order_by="Revision.number"
    )


class FeederColumns:
    """Conductor fields of :class:`server.calc.model.Feeder`, stored on the element they feed."""

    feeder_length_ft: Mapped[float] = mapped_column(Float, default=0.0)
    feeder_material: Mapped[str] = mapped_column(String(4), default="Cu")
    feeder_conduit: Mapped[str] = mapped_column(String(12), default="steel")
    feeder_sets: Mapped[int | None] = mapped_column(Integer)
    feeder_size: Mapped[str | None] = mapped_column(String(10))
    feeder_insulation_c: Mapped[int] = mapped_column(Integer, default=75)
    feeder_ambient_c: Mapped[float] = mapped_column(Float, default=30.0)
    feeder_terminal_c: Mapped[int] = mapped_column(Integer, default=75)
    feeder_ocpd_amps: Mapped[int | None] = mapped_column(Integer)
    feeder_egc: Mapped[str | None] = mapped_column(String(10))
    feeder_neutral_size: Mapped[str | None] = mapped_column(String(10))


class Source(Base):
    """A utility service or generator: the root of a distribution tree."""

    __tablename__ = "sources"
    __table_args__ = (UniqueConstraint("project_id", "tag"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    position: Mapped[int] = mapped_column(Integer, default=0)
    tag: Mapped[str] = mapped_column(String(40))
    system: Mapped[str] = mapped_column(String(40))
    fault_ka: Mapped[float | None] = mapped_column(Float)
    x_over_r: Mapped[float | None] = mapped_column(Float)
    description: Mapped[str] = mapped_column(String(500), default="")

    project: Mapped[Project] = relationship(back_populates="sources")


class Transformer(FeederColumns, Base):
    """A transformer; ``fed_from`` names a source, or the panel one of whose circuits feeds it."""

    __tablename__ = "transformers"
    __table_args__ = (UniqueConstraint("project_id", "tag"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    position: Mapped[int] = mapped_column(Integer, default=0)
    tag: Mapped[str] = mapped_column(String(40))
    kva: Mapped[float] = mapped_column(Float)
    primary_system: Mapped[str] = mapped_column(String(40))
    secondary_system: Mapped[str] = mapped_column(String(40))
    impedance_pct: Mapped[float] = mapped_column(Float, default=5.0)
    x_over_r: Mapped[float | None] = mapped_column(Float)
    fed_from: Mapped[str | None] = mapped_column(String(40))
    loss_pct: Mapped[float] = mapped_column(Float, default=0.0)
    k_factor: Mapped[int | None] = mapped_column(Integer)
    description: Mapped[str] = mapped_column(String(500), default="")
    location: Mapped[str] = mapped_column(String(500), default="")

    project: Mapped[Project] = relationship(back_populates="transformers")


class Panel(FeederColumns, Base):
    """A panelboard or switchboard; its circuits are :class:`Circuit` rows."""

    __tablename__ = "panels"
    __table_args__ = (UniqueConstraint("project_id", "tag"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    position: Mapped[int] = mapped_column(Integer, default=0)
    tag: Mapped[str] = mapped_column(String(40))
    system: Mapped[str] = mapped_column(String(40))
    fed_from: Mapped[str | None] = mapped_column(String(40))
    bus_amps: Mapped[int] = mapped_column(Integer, default=225)
    main_amps: Mapped[int | None] = mapped_column(Integer)
    spaces: Mapped[int] = mapped_column(Integer, default=42)
    sccr_ka: Mapped[float | None] = mapped_column(Float)
    description: Mapped[str] = mapped_column(String(500), default="")
    location: Mapped[str] = mapped_column(String(500), default="")
    mounting: Mapped[str] = mapped_column(String(500), default="")
    # The installer's cyclic landing of the feeder (0, 1 or 2; see server.calc.model.Panel).
    feeder_rotation: Mapped[int] = mapped_column(Integer, default=0, server_default="0", nullable=False)

    project: Mapped[Project] = relationship(back_populates="panels")
    circuits: Mapped[list[Circuit]] = relationship(
        back_populates="panel", cascade="all, delete-orphan", order_by="Circuit.slot"
    )


class Circuit(Base):
    """One breaker (or space) of a panel, identified by its first slot."""

    __tablename__ = "circuits"
    __table_args__ = (UniqueConstraint("panel_id", "slot"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    panel_id: Mapped[int] = mapped_column(ForeignKey("panels.id", ondelete="CASCADE"), index=True)
    slot: Mapped[int] = mapped_column(Integer)
    poles: Mapped[int] = mapped_column(Integer, default=1)
    description: Mapped[str] = mapped_column(String(500), default="")
    category: Mapped[str | None] = mapped_column(String(20))
    va: Mapped[float | None] = mapped_column(Float)
    pf: Mapped[float | None] = mapped_column(Float)
    continuous: Mapped[bool | None] = mapped_column(Boolean)
    breaker_amps: Mapped[int | None] = mapped_column(Integer)
    status: Mapped[str] = mapped_column(String(10), default="new")
    harmonic3_pct: Mapped[float] = mapped_column(Float, default=0.0)
    feeds: Mapped[str | None] = mapped_column(String(40))
    locked: Mapped[bool] = mapped_column(Boolean, default=False)
    notes: Mapped[str] = mapped_column(Text, default="")
    version: Mapped[int] = mapped_column(Integer, default=1)

    panel: Mapped[Panel] = relationship(back_populates="circuits")


class Revision(Base):
    """An issued set: the project file and results frozen at issue, with their content hash."""

    __tablename__ = "revisions"
    __table_args__ = (UniqueConstraint("project_id", "number"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    issued_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    description: Mapped[str] = mapped_column(String(500), default="")
    issued_by: Mapped[str] = mapped_column(String(100), default="")
    project_json: Mapped[str] = mapped_column(Text)
    results_json: Mapped[str] = mapped_column(Text)
    content_hash: Mapped[str] = mapped_column(String(64))

    project: Mapped[Project] = relationship(back_populates="revisions")


# --------------------------------------------------------------------------- team use (accounts, audit)


class User(Base):
    """An account: a role (``admin``, ``engineer``, ``reviewer``) and an Argon2 password hash."""

    __tablename__ = "users"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(60), unique=True)
    role: Mapped[str] = mapped_column(String(12))
    password_hash: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    password_changed_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)


class AuthSession(Base):
    """A signed-in browser: keyed by the SHA-256 of its cookie token (the token itself is never stored)."""

    __tablename__ = "auth_sessions"

    id: Mapped[str] = mapped_column(String(64), primary_key=True)
    user_id: Mapped[int] = mapped_column(ForeignKey("users.id", ondelete="CASCADE"), index=True)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    expires_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), index=True)
    address: Mapped[str] = mapped_column(String(64), default="")


class AuditEvent(Base):
    """One change: who, when, what (the changed fields before and after, as JSON)."""

    __tablename__ = "audit_events"

    id: Mapped[int] = mapped_column(primary_key=True)
    at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow, index=True)
    user_name: Mapped[str] = mapped_column(String(60), index=True)
    project_id: Mapped[int | None] = mapped_column(Integer, index=True)
    panel_tag: Mapped[str | None] = mapped_column(String(40), index=True)
    action: Mapped[str] = mapped_column(String(20))
    target: Mapped[str] = mapped_column(String(120))
    before_json: Mapped[str | None] = mapped_column(Text)
    after_json: Mapped[str | None] = mapped_column(Text)


class Comment(Base):
    """A review comment on a panel (optionally on one slot): a note beside the project, not part of its file.

    ``author_id`` is the user's id when the comment was written (0 in single-user mode), kept
    without a foreign key so a comment outlives its author's account; ``author_name`` is what
    the thread shows.  Comments do not move ``Project.data_version``.
    """

    __tablename__ = "comments"

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    panel_tag: Mapped[str] = mapped_column(String(40))
    slot: Mapped[int | None] = mapped_column(Integer)
    author_id: Mapped[int] = mapped_column(Integer)
    author_name: Mapped[str] = mapped_column(String(60))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    body: Mapped[str] = mapped_column(Text)
    resolved: Mapped[bool] = mapped_column(Boolean, default=False)
    resolved_by: Mapped[str | None] = mapped_column(String(60))
    resolved_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True))


class ServerKey(Base):
    """Secrets the server made for itself (the session-signing key when none is configured)."""

    __tablename__ = "server_keys"

    name: Mapped[str] = mapped_column(String(40), primary_key=True)
    value: Mapped[str] = mapped_column(String(200))


class MeteredLoad(Base):
    """An existing load from metered data (NEC 220.87) for one node of a project.

    The figure is the analysis' existing load (maximum demand × 125 %); while ``active`` the
    calculation uses it in place of the existing circuits below that node (see
    :mod:`server.calc.engine`).  Rows are never edited except for ``active``: a new upload adds
    a new row and deactivates the older ones of the same node.
    """

    __tablename__ = "metered_load"

    id: Mapped[int] = mapped_column(primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    node_tag: Mapped[str] = mapped_column(String(40))
    existing_load_kva: Mapped[float] = mapped_column(Float)
    basis: Mapped[str] = mapped_column(String(40))
    peak_kva: Mapped[float] = mapped_column(Float)
    peak_at: Mapped[str] = mapped_column(String(40))  # ISO 8601 as read from the file (zone kept if given)
    readings: Mapped[int] = mapped_column(Integer, default=0)
    bad_rows: Mapped[int] = mapped_column(Integer, default=0)
    coverage_days: Mapped[float] = mapped_column(Float, default=0.0)
    file_name: Mapped[str] = mapped_column(String(255), default="")
    uploaded_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    uploaded_by: Mapped[str] = mapped_column(String(60), default="")
    active: Mapped[bool] = mapped_column(Boolean, default=True)


class FirmSettings(Base):
    """The firm's defaults for new projects and their title block: one row (``id`` 1), absent until first saved.

    Each column is the ProjectInfo field of the same name (:mod:`server.calc.model`); the values
    are validated by the project file's own rules (:mod:`server.firm`) before they are written.
    A project keeps what it was created with: changing these never rewrites an existing project.
    """

    __tablename__ = "firm_settings"

    id: Mapped[int] = mapped_column(primary_key=True)
    firm: Mapped[str] = mapped_column(String(200), default="")
    code: Mapped[str] = mapped_column(String(20), default="NEC-2023")
    occupancy: Mapped[str] = mapped_column(String(20), default="office")
    include_future: Mapped[bool] = mapped_column(Boolean, default=False)
    vd_feeder_pct: Mapped[float] = mapped_column(Float, default=3.0)
    vd_total_pct: Mapped[float] = mapped_column(Float, default=5.0)
    imbalance_limit_pct: Mapped[float] = mapped_column(Float, default=10.0)
    growth_margin_pct: Mapped[float] = mapped_column(Float, default=25.0)
    paper: Mapped[str] = mapped_column(String(30), default="tabloid-landscape")
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow, onupdate=utcnow)
