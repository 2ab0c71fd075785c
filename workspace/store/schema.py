"""ORM models (SQLAlchemy 2, typed). Schema changes go through Alembic only.

Entities: project -> network -> network version (immutable); blobs hold arrays,
content-addressed by sha256. Parameter sets and runs live in later revisions.
ORM objects never leave the services layer.
"""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import (
    BigInteger,
    CheckConstraint,
    DateTime,
    Float,
    ForeignKey,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
    UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


# 64-bit on PostgreSQL (an array may exceed 2**31 bytes); SQLite's INTEGER is 64-bit already
_BIG_INT = BigInteger().with_variant(Integer(), "sqlite")


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class Blob(Base):
    """One array, stored once: ``np.save(allow_pickle=False)`` bytes, compressed by ``codec``.

    ``hash`` is sha256 over the canonical raw bytes (dtype, shape and the
    little-endian C-order data), independent of the codec.
    """

    __tablename__ = "blobs"

    hash: Mapped[str] = mapped_column(String(64), primary_key=True)
    codec: Mapped[str] = mapped_column(String(32))
    dtype: Mapped[str] = mapped_column(String(16))
    length: Mapped[int] = mapped_column(_BIG_INT)
    raw_size: Mapped[int] = mapped_column(_BIG_INT)
    data: Mapped[bytes] = mapped_column(LargeBinary)  # b"" when the array is in chunks
    # 0: the array is ``data``; n > 0: it is in n ``blob_chunks`` rows (codec zstd-chunks, revision 0006)
    chunks: Mapped[int] = mapped_column(Integer, server_default="0", default=0)


class BlobChunk(Base):
    """One piece of a chunked array (revision 0006): raw bytes ``raw_size`` long, sha256 ``hash`` over
    them, stored zstd-compressed in ``data``; pieces are numbered from 0 in array order."""

    __tablename__ = "blob_chunks"

    blob_hash: Mapped[str] = mapped_column(ForeignKey("blobs.hash", ondelete="CASCADE"), primary_key=True)
    seq: Mapped[int] = mapped_column(Integer, primary_key=True)
    raw_size: Mapped[int] = mapped_column(Integer)
    hash: Mapped[str] = mapped_column(String(64))
    data: Mapped[bytes] = mapped_column(LargeBinary)


class Project(Base):
    __tablename__ = "projects"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)

    networks: Mapped[list["Network"]] = relationship(back_populates="project")


class Network(Base):
    __tablename__ = "networks"
    __table_args__ = (UniqueConstraint("project_id", "name"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)

    project: Mapped[Project] = relationship(back_populates="networks")
    versions: Mapped[list["NetworkVersion"]] = relationship(
        back_populates="network", order_by="NetworkVersion.number", foreign_keys="NetworkVersion.network_id")


class NetworkVersion(Base):
    """An immutable snapshot of a network in canonical form (see ``GraphData``)."""

    __tablename__ = "network_versions"
    __table_args__ = (
        UniqueConstraint("network_id", "number"),
        CheckConstraint("number >= 1", name="number_positive"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    network_id: Mapped[int] = mapped_column(ForeignKey("networks.id", ondelete="CASCADE"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    parent_id: Mapped[int | None] = mapped_column(ForeignKey("network_versions.id"), nullable=True)
    content_hash: Mapped[str] = mapped_column(String(64), index=True)
    n_nodes: Mapped[int] = mapped_column(Integer)
    n_edges: Mapped[int] = mapped_column(Integer)
    total_weight: Mapped[float] = mapped_column(Float)
    message: Mapped[str] = mapped_column(Text, default="")
    source_name: Mapped[str] = mapped_column(Text)
    source_format: Mapped[str] = mapped_column(String(32))
    policy_json: Mapped[str] = mapped_column(Text)
    report_json: Mapped[str] = mapped_column(Text)
    node_offsets_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    node_bytes_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    edge_u_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    edge_v_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    weight_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)

    network: Mapped[Network] = relationship(back_populates="versions", foreign_keys=[network_id])


RUN_STATUSES = ("running", "done", "failed", "cancelled", "interrupted")
RUN_KINDS = ("computed", "attached")


class ParamSet(Base):
    """A named parameter set of a project; its values live in immutable versions."""

    __tablename__ = "param_sets"
    __table_args__ = (UniqueConstraint("project_id", "name"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    project_id: Mapped[int] = mapped_column(ForeignKey("projects.id", ondelete="CASCADE"), index=True)
    name: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)


class ParamSetVersion(Base):
    """Immutable values of a parameter set: method, k and the validated method parameters."""

    __tablename__ = "param_set_versions"
    __table_args__ = (
        UniqueConstraint("param_set_id", "number"),
        CheckConstraint("number >= 1", name="number_positive"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    param_set_id: Mapped[int] = mapped_column(ForeignKey("param_sets.id", ondelete="CASCADE"), index=True)
    number: Mapped[int] = mapped_column(Integer)
    method: Mapped[str] = mapped_column(String(64))
    k: Mapped[str | None] = mapped_column(String(16), nullable=True)  # an integer, "auto", or NULL (method default)
    values_json: Mapped[str] = mapped_column(Text)
    values_hash: Mapped[str] = mapped_column(String(64), index=True)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)


class Run(Base):
    """One partition of one network version: computed by a method, or attached from a file.

    Written twice: once as ``running`` before compute, once with its outcome.
    After that it never changes (a vanished process is marked ``interrupted``).
    """

    __tablename__ = "runs"
    __table_args__ = (
        CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')",
                        name="status_known"),
        CheckConstraint("kind IN ('computed', 'attached')", name="kind_known"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    version_id: Mapped[int] = mapped_column(ForeignKey("network_versions.id", ondelete="CASCADE"), index=True)
    param_set_version_id: Mapped[int | None] = mapped_column(
        ForeignKey("param_set_versions.id"), nullable=True, index=True)
    rerun_of: Mapped[int | None] = mapped_column(ForeignKey("runs.id"), nullable=True)
    kind: Mapped[str] = mapped_column(String(16))
    method: Mapped[str] = mapped_column(String(64))
    label: Mapped[str] = mapped_column(Text, default="")
    params_json: Mapped[str] = mapped_column(Text)
    k_requested: Mapped[str | None] = mapped_column(String(16), nullable=True)
    seed: Mapped[int | None] = mapped_column(Integer, nullable=True)
    repeats: Mapped[int] = mapped_column(Integer, default=1)
    status: Mapped[str] = mapped_column(String(16), index=True)
    error: Mapped[str | None] = mapped_column(Text, nullable=True)
    started_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)
    finished_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True), nullable=True)
    host: Mapped[str | None] = mapped_column(String(255), nullable=True)
    pid: Mapped[int | None] = mapped_column(Integer, nullable=True)
    process_token: Mapped[str | None] = mapped_column(String(64), nullable=True)
    k: Mapped[int | None] = mapped_column(Integer, nullable=True)
    membership_blob: Mapped[str | None] = mapped_column(ForeignKey("blobs.hash"), nullable=True)
    membership_hash: Mapped[str | None] = mapped_column(String(64), nullable=True, index=True)
    stability_blob: Mapped[str | None] = mapped_column(ForeignKey("blobs.hash"), nullable=True)
    eigenvalues_blob: Mapped[str | None] = mapped_column(ForeignKey("blobs.hash"), nullable=True)
    quality_json: Mapped[str] = mapped_column(Text, default="{}")
    diagnostics_json: Mapped[str] = mapped_column(Text, default="{}")
    warnings_json: Mapped[str] = mapped_column(Text, default="[]")
    provenance_json: Mapped[str] = mapped_column(Text, default="{}")


class RunCommunity(Base):
    """Per-community table of a finished run (small; for SQL queries and quick listings)."""

    __tablename__ = "run_communities"

    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"), primary_key=True)
    community: Mapped[int] = mapped_column(Integer, primary_key=True)
    size: Mapped[int] = mapped_column(Integer)
    volume: Mapped[float | None] = mapped_column(Float, nullable=True)
    cut: Mapped[float | None] = mapped_column(Float, nullable=True)
    conductance: Mapped[float | None] = mapped_column(Float, nullable=True)
    stability: Mapped[float | None] = mapped_column(Float, nullable=True)


class RunMeasure(Base):
    """Scalar quality measures of a finished run, one row each (modularity, normalized_cut, …)."""

    __tablename__ = "run_measures"

    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"), primary_key=True)
    name: Mapped[str] = mapped_column(String(64), primary_key=True)
    value: Mapped[float | None] = mapped_column(Float, nullable=True)


ANNOTATION_ACTIONS = ("note", "tag", "untag")


class Annotation(Base):
    """One annotation event on a run, a network version or a parameter-set version.

    Insert-only: a note is added, a tag is added (``tag``) or taken off
    (``untag``) by a new row; the current tags are the replay of a target's
    rows in id order. The annotated record itself never changes. Exactly one of
    the three target columns is set; rows go with their target when it is deleted.
    """

    __tablename__ = "annotations"
    __table_args__ = (
        CheckConstraint("action IN ('note', 'tag', 'untag')", name="action_known"),
        CheckConstraint("(CASE WHEN run_id IS NULL THEN 0 ELSE 1 END) + (CASE WHEN version_id IS NULL THEN 0 ELSE 1 END)"
                        " + (CASE WHEN param_set_version_id IS NULL THEN 0 ELSE 1 END) = 1", name="one_target"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    run_id: Mapped[int | None] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"), nullable=True, index=True)
    version_id: Mapped[int | None] = mapped_column(
        ForeignKey("network_versions.id", ondelete="CASCADE"), nullable=True, index=True)
    param_set_version_id: Mapped[int | None] = mapped_column(
        ForeignKey("param_set_versions.id", ondelete="CASCADE"), nullable=True, index=True)
    action: Mapped[str] = mapped_column(String(16))
    text: Mapped[str] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who made it (0005)


# --- sweeps and cached embeddings (revision 0004) ----------------------------------

SWEEP_STATUSES = ("running", "done", "failed", "cancelled", "interrupted")


class Sweep(Base):
    """A recorded exploration of one version over k, a parameter's values and seeds; it groups ordinary runs.

    The request (method, base parameters, k list, varied parameter, seeds, perturbation) is kept as asked;
    extending a sweep widens ``ks_json``/``seeds`` and adds runs, never recomputes existing ones.
    """

    __tablename__ = "sweeps"
    __table_args__ = (
        CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')",
                        name="status_known"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    version_id: Mapped[int] = mapped_column(ForeignKey("network_versions.id", ondelete="CASCADE"), index=True)
    param_set_version_id: Mapped[int | None] = mapped_column(ForeignKey("param_set_versions.id"), nullable=True)
    method: Mapped[str] = mapped_column(String(64))
    params_json: Mapped[str] = mapped_column(Text)
    ks_json: Mapped[str] = mapped_column(Text)            # list of int, or [null] when the method picks k
    vary_name: Mapped[str | None] = mapped_column(String(64), nullable=True)
    vary_values_json: Mapped[str] = mapped_column(Text, default="[null]")
    seed: Mapped[int] = mapped_column(Integer)
    seeds: Mapped[int] = mapped_column(Integer)
    perturb: Mapped[float] = mapped_column(Float)
    status: Mapped[str] = mapped_column(String(16), index=True)
    error: Mapped[str | None] = mapped_column(Text, nullable=True)
    started_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    finished_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True), nullable=True)
    host: Mapped[str | None] = mapped_column(String(255), nullable=True)
    pid: Mapped[int | None] = mapped_column(Integer, nullable=True)
    process_token: Mapped[str | None] = mapped_column(String(64), nullable=True)
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)  # who started it (0009)


class SweepRun(Base):
    """One task of a sweep: a run computed for (k, varied value, repeat).

    A task whose run failed or was cancelled may be tried again (resume, extend): it then has several
    runs, and the newest finished one counts.
    """

    __tablename__ = "sweep_runs"

    sweep_id: Mapped[int] = mapped_column(ForeignKey("sweeps.id", ondelete="CASCADE"), primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("runs.id", ondelete="CASCADE"), primary_key=True, index=True)
    k: Mapped[int | None] = mapped_column(Integer, nullable=True)
    value_json: Mapped[str] = mapped_column(String(200), default="null")
    repeat: Mapped[int] = mapped_column(Integer)


class Embedding(Base):
    """A cached spectral embedding (eigenpairs of one operator), content-addressed by ``key``.

    ``key`` is sha256 over the version's content hash and ``fields_json`` (operator and its parameters,
    number of vectors, seed, solver settings). Vectors are stored column after column as one blob.
    """

    __tablename__ = "embeddings"

    key: Mapped[str] = mapped_column(String(64), primary_key=True)
    version_id: Mapped[int] = mapped_column(ForeignKey("network_versions.id", ondelete="CASCADE"), index=True)
    operator: Mapped[str] = mapped_column(String(32))
    fields_json: Mapped[str] = mapped_column(Text)
    n_rows: Mapped[int] = mapped_column(Integer)
    n_vectors: Mapped[int] = mapped_column(Integer)
    values_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    vectors_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    solver: Mapped[str] = mapped_column(String(32))
    residuals_json: Mapped[str] = mapped_column(Text)
    info_json: Mapped[str] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))


# --- tracked parameter sets and updates (revision 0007) ------------------------------------------

UPDATE_STATUSES = ("running", "done", "failed", "cancelled", "interrupted")
UPDATE_TRIGGERS = ("import", "request")


class TrackedSet(Base):
    """A parameter-set version a network keeps re-running on each new version (see services/tracking.py).

    A configuration row, not a record: it is added and removed by the user; what was run is kept in
    ``tracked_updates`` / ``tracked_update_runs`` and in the runs themselves.
    """

    __tablename__ = "tracked_sets"
    __table_args__ = (UniqueConstraint("network_id", "param_set_version_id"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    network_id: Mapped[int] = mapped_column(ForeignKey("networks.id", ondelete="CASCADE"), index=True)
    param_set_version_id: Mapped[int] = mapped_column(ForeignKey("param_set_versions.id", ondelete="CASCADE"))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)


class TrackedUpdate(Base):
    """One update: every tracked set run on one version (after an import, or on request).

    Written as ``running`` before the first run, then moved once to its outcome. An update whose
    process vanished (``host``/``pid``/``process_token`` as for runs) is shown as ``interrupted``.
    """

    __tablename__ = "tracked_updates"
    __table_args__ = (
        CheckConstraint("status IN ('running', 'done', 'failed', 'cancelled', 'interrupted')", name="status_known"),
        CheckConstraint("trigger IN ('import', 'request')", name="trigger_known"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    network_id: Mapped[int] = mapped_column(ForeignKey("networks.id", ondelete="CASCADE"), index=True)
    version_id: Mapped[int] = mapped_column(ForeignKey("network_versions.id", ondelete="CASCADE"), index=True)
    previous_version_id: Mapped[int | None] = mapped_column(
        ForeignKey("network_versions.id", ondelete="SET NULL"), nullable=True)
    trigger: Mapped[str] = mapped_column(String(16))
    status: Mapped[str] = mapped_column(String(16))
    started_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))
    finished_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True), nullable=True)
    created_by: Mapped[str | None] = mapped_column(String(200), nullable=True)
    host: Mapped[str | None] = mapped_column(String(255), nullable=True)
    pid: Mapped[int | None] = mapped_column(Integer, nullable=True)
    process_token: Mapped[str | None] = mapped_column(String(64), nullable=True)


class TrackedUpdateRun(Base):
    """One tracked set within an update: its new run, the previous version's run it is compared with,
    a short summary of that comparison, and the community labels shown for the new run.

    ``labels_json``: ``{"aligned_to": RUN, "map": [shown label of community 0, 1, …], "next": N}``
    (the stored membership keeps its canonical numbering; only what people see is renumbered).
    """

    __tablename__ = "tracked_update_runs"

    update_id: Mapped[int] = mapped_column(ForeignKey("tracked_updates.id", ondelete="CASCADE"), primary_key=True)
    position: Mapped[int] = mapped_column(Integer, primary_key=True)
    params_ref: Mapped[str] = mapped_column(String(420))
    param_set_version_id: Mapped[int | None] = mapped_column(
        ForeignKey("param_set_versions.id", ondelete="SET NULL"), nullable=True)
    run_id: Mapped[int | None] = mapped_column(ForeignKey("runs.id", ondelete="SET NULL"), nullable=True, index=True)
    previous_run_id: Mapped[int | None] = mapped_column(ForeignKey("runs.id", ondelete="SET NULL"), nullable=True)
    status: Mapped[str] = mapped_column(String(16))
    error: Mapped[str | None] = mapped_column(Text, nullable=True)
    summary_json: Mapped[str] = mapped_column(Text, default="{}")
    labels_json: Mapped[str | None] = mapped_column(Text, nullable=True)


# --- node attribute tables (revision 0008) -------------------------------------------

NODE_ATTRIBUTE_TYPES = ("boolean", "number", "text")


class NodeTable(Base):
    """The node attribute table of one network version (at most one; insert-only like the version).

    Columns are aligned to the version's canonical node order and stored as blobs
    (:class:`NodeTableColumn`). ``attributes_hash`` is sha256 over the column names, types and
    array hashes: it is kept apart from the version's ``content_hash``, which covers the graph
    only, so a version that differs from its parent only by attributes has the same content hash.
    ``coords_json`` names the coordinate columns (``{"x": name, "y": name, "kind": "plane" |
    "geographic"}``) or is ``null``.
    """

    __tablename__ = "node_tables"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    version_id: Mapped[int] = mapped_column(ForeignKey("network_versions.id", ondelete="CASCADE"),
                                            unique=True)
    attributes_hash: Mapped[str] = mapped_column(String(64), index=True)
    n_rows: Mapped[int] = mapped_column(Integer)
    source_name: Mapped[str] = mapped_column(Text)
    coords_json: Mapped[str] = mapped_column(Text, default="null")
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True))


class NodeTableColumn(Base):
    """One attribute column of a node table, typed, as blobs aligned to the version's node order.

    ``values_blob``: float64 (number), bool (boolean) or int32 codes into a dictionary (text, -1 for
    no value); ``present_blob``: bool, True where the node has a value; text columns keep their
    distinct values as ``dictionary_offsets_blob`` / ``dictionary_bytes_blob`` (UTF-8, like node ids).
    """

    __tablename__ = "node_table_columns"
    __table_args__ = (
        CheckConstraint("type IN ('boolean', 'number', 'text')", name="type_known"),
    )

    table_id: Mapped[int] = mapped_column(ForeignKey("node_tables.id", ondelete="CASCADE"), primary_key=True)
    position: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(200))
    type: Mapped[str] = mapped_column(String(16))
    values_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    present_blob: Mapped[str] = mapped_column(ForeignKey("blobs.hash"))
    dictionary_offsets_blob: Mapped[str | None] = mapped_column(ForeignKey("blobs.hash"), nullable=True)
    dictionary_bytes_blob: Mapped[str | None] = mapped_column(ForeignKey("blobs.hash"), nullable=True)
