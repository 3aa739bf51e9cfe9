"""The register's tables, as SQLAlchemy 2.x typed ORM models.

The schema is created and upgraded by the Alembic migrations in ``migrations/``; the
models describe it (a test checks that both agree). Times are stored in UTC.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy import (
    BigInteger,
    Boolean,
    DateTime,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Text,
    TypeDecorator,
    UniqueConstraint,
    and_,
    false,
    func,
    literal_column,
    select,
)
from sqlalchemy.engine import Dialect
from sqlalchemy.ext.compiler import compiles
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column
from sqlalchemy.schema import CreateIndex

NAMING = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

#: code statuses
ISSUED = "issued"
VOIDED = "voided"
#: held back for a while (a card reported lost that may turn up); reinstate or replace
SUSPENDED = "suspended"
#: never stored: an issued code past its ``valid_until`` answers so (the clock decides)
EXPIRED = "expired"
#: what a series warns at when it fills past these percentages, unless it says otherwise
DEFAULT_FILL_LEVELS = "80,95"

#: series modes
SEQUENTIAL = "sequential"
SCATTERED = "scattered"


class UTCDateTime(TypeDecorator[datetime]):
    """A timestamp that is always timezone-aware UTC in Python, whatever the backend."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Dialect) -> Any:
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("naive datetime given to the register")
        value = value.astimezone(UTC)
        return value.replace(tzinfo=None) if dialect.name == "sqlite" else value

    def process_result_value(self, value: Any, dialect: Dialect) -> datetime | None:
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=UTC)  # type: ignore[no-any-return]
        return value.astimezone(UTC)  # type: ignore[no-any-return]


#: folded holder/note text for prefix search; byte order (collation "C") on PostgreSQL so
#: a prefix range is an index range whatever the database's locale
SEARCH_KEY = String(200).with_variant(String(200, collation="C"), "postgresql")


def _partial_index(column: str, where: str, *, unique: bool = False) -> Index:
    """An index over the rows where ``where`` holds, declared once for every backend.

    Not ``postgresql_where=``/``sqlite_where=``: naming a dialect's argument makes SQLAlchemy
    import that whole dialect when the models load, so every command on a SQLite register
    would pay for PostgreSQL's. The clause is added by :func:`_create_partial_index`."""
    return Index(None, column, unique=unique, info={"where": where})


@compiles(CreateIndex)
def _create_partial_index(create: CreateIndex, compiler: Any, **kw: Any) -> str:
    """CREATE INDEX, with the WHERE clause of a partial index (both backends know it)."""
    sql: str = compiler.visit_create_index(create, **kw)
    where = create.element.info.get("where")
    return f"{sql} WHERE {where}" if where else sql


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING)


class Series(Base):
    """A series: the fixed shape of its codes and how numbers are drawn."""

    __tablename__ = "series"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    key: Mapped[str] = mapped_column(String(64), unique=True)
    title: Mapped[str] = mapped_column(String(200), default="")
    scheme: Mapped[str] = mapped_column(String(40))
    alphabet: Mapped[str] = mapped_column(String(200))
    length: Mapped[int] = mapped_column(Integer)
    prefix: Mapped[str] = mapped_column(String(32), default="")
    suffix: Mapped[str] = mapped_column(String(32), default="")
    grouping: Mapped[str] = mapped_column(String(64), default="")
    separator: Mapped[str] = mapped_column(String(4), default="-")
    mode: Mapped[str] = mapped_column(String(16), default=SEQUENTIAL)
    range_start: Mapped[int] = mapped_column(BigInteger)
    range_end: Mapped[int] = mapped_column(BigInteger)
    #: counters consumed so far: counter k maps to base start+k (in order) or to the
    #: keyed permutation's k-th value (scattered)
    next_counter: Mapped[int] = mapped_column(BigInteger, default=0)
    #: codes held in this series (issued, voided or imported): capacity - this = left
    code_count: Mapped[int] = mapped_column(BigInteger, default=0)
    #: codes brought in by import; while zero the allocator need not look for them
    imported_count: Mapped[int] = mapped_column(BigInteger, default=0)
    #: the AES key of a scattered series; never printed or exported
    scatter_key: Mapped[bytes | None] = mapped_column(LargeBinary, default=None)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime())
    created_by: Mapped[str] = mapped_column(String(120))
    #: whether holders are people (member cards), which makes them personal data, or
    #: places and things (a workshop shelf): the personal-data caution follows this
    holds_people: Mapped[bool] = mapped_column(Boolean, default=False, server_default=false())
    #: how long a newly issued code stays valid, in days; None: no end
    valid_for_days: Mapped[int | None] = mapped_column(Integer, default=None)
    #: percentages of the capacity at which issuing warns, ascending, comma-separated
    fill_levels: Mapped[str] = mapped_column(String(32), default=DEFAULT_FILL_LEVELS)


class Batch(Base):
    """One act of issuance (or import): its codes commit together or not at all."""

    __tablename__ = "batch"
    #: unique where given; most batches have none, and those cost no index entry. A series'
    #: batches are indexed only where they are imports (what issuing past imported numbers
    #: looks up): an issue's batch costs no index entry for its series (migration fewer_pages)
    __table_args__ = (
        _partial_index("request_id", "request_id IS NOT NULL", unique=True),
        _partial_index("series_id", "kind = 'import'"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    series_id: Mapped[int] = mapped_column(ForeignKey("series.id"))
    kind: Mapped[str] = mapped_column(String(16))  # issue | replace | import
    request_id: Mapped[str | None] = mapped_column(String(200), default=None)
    count: Mapped[int] = mapped_column(Integer)
    #: when and by whom its codes were issued (a code row repeats neither; see
    #: :func:`code_issued_at`): the batch's constants live here once
    created_at: Mapped[datetime] = mapped_column(UTCDateTime())
    actor: Mapped[str] = mapped_column(String(120))
    #: the ids its codes lie between (inclusive): a batch's codes are found by this range of
    #: the primary key, not by an index of their own. On SQLite the range holds this batch's
    #: codes only; on PostgreSQL codes that other acts wrote at the same moment may fall
    #: inside it, so a reader also asks for ``batch_id`` (:func:`in_batch`). None: no codes.
    code_id_from: Mapped[int | None] = mapped_column(BigInteger, default=None)
    code_id_to: Mapped[int | None] = mapped_column(BigInteger, default=None)


class IssuedCode(Base):
    """A code the register holds. Rows are never deleted: a voided code stays here,
    so no path can issue it again."""

    __tablename__ = "issued_code"
    __table_args__ = (
        UniqueConstraint("series_id", "base"),
        _partial_index("holder_key", "holder_key IS NOT NULL"),
        _partial_index("note_key", "note_key IS NOT NULL"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    series_id: Mapped[int] = mapped_column(ForeignKey("series.id"))
    #: canonical form: prefix, body, check, suffix; unique across the register
    code: Mapped[str] = mapped_column(String(100), unique=True)
    base: Mapped[int] = mapped_column(BigInteger)
    status: Mapped[str] = mapped_column(String(16), default=ISSUED)
    #: no index of its own: a batch's codes are a range of ids (``Batch.code_id_from``/``_to``)
    batch_id: Mapped[int] = mapped_column(ForeignKey("batch.id"))
    holder: Mapped[str | None] = mapped_column(String(200), default=None)
    note: Mapped[str | None] = mapped_column(Text, default=None)
    #: when and by whom an imported code was first issued, where its file said so; None (every
    #: code issued here): its batch's ``created_at`` and ``actor``. Read both through
    #: :func:`code_issued_at` and :func:`code_issued_by`, never alone.
    origin_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    origin_by: Mapped[str | None] = mapped_column(String(120), default=None)
    void_reason: Mapped[str | None] = mapped_column(Text, default=None)
    voided_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    voided_by: Mapped[str | None] = mapped_column(String(120), default=None)
    replaces_id: Mapped[int | None] = mapped_column(ForeignKey("issued_code.id"), default=None)
    replaced_by_id: Mapped[int | None] = mapped_column(
        ForeignKey("issued_code.id"), default=None
    )
    print_count: Mapped[int] = mapped_column(Integer, default=0)
    last_seen_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    last_seen_where: Mapped[str | None] = mapped_column(String(200), default=None)
    #: where the item carrying this code belongs (shelf, room); a count seeing it
    #: anywhere else reports it as found elsewhere
    expected_where: Mapped[str | None] = mapped_column(String(200), default=None)
    #: holder and note folded for search (see :func:`issuer.register.standing.search_key`);
    #: erased together with the texts they come from
    #: indexed only where present (partial indexes): a code with no holder costs no index entry
    holder_key: Mapped[str | None] = mapped_column(SEARCH_KEY, default=None)
    note_key: Mapped[str | None] = mapped_column(SEARCH_KEY, default=None)
    #: the last instant the code is valid; None: valid until voided
    valid_until: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    suspended_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    suspended_by: Mapped[str | None] = mapped_column(String(120), default=None)
    suspend_reason: Mapped[str | None] = mapped_column(Text, default=None)
    #: when holder and note were last erased (the texts are gone; the act is logged)
    erased_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    #: 16 random bytes while the code holds holder or note text: the log records
    #: SHA-256(salt + texts), never the texts; erasure clears it with them (see standing.text_digest)
    text_salt: Mapped[bytes | None] = mapped_column(LargeBinary(16), default=None)


def code_issued_at() -> Any:
    """When a code was issued: its own time if an import brought one, else its batch's.
    The statement must join :class:`Batch` (``Batch.id == IssuedCode.batch_id``)."""
    return func.coalesce(IssuedCode.origin_at, Batch.created_at, type_=UTCDateTime())


def code_issued_by() -> Any:
    """Who issued a code: as :func:`code_issued_at`, its own name or its batch's actor."""
    return func.coalesce(IssuedCode.origin_by, Batch.actor, type_=String(120))


def in_batch(batch_id: Any) -> Any:
    """The codes of batch ``batch_id`` (a value, not a column): a range of the primary key
    (the batch's ``code_id_from``..``code_id_to``), then the batch itself."""
    ranged = Batch.__table__.alias("ranged")
    lowest = select(ranged.c.code_id_from).where(ranged.c.id == batch_id).correlate(None)
    highest = select(ranged.c.code_id_to).where(ranged.c.id == batch_id).correlate(None)
    return and_(
        IssuedCode.id >= lowest.scalar_subquery(),
        IssuedCode.id <= highest.scalar_subquery(),
        IssuedCode.batch_id == batch_id,
    )


def batch_range_sql(marker: str = ":b", table: str = "issued_code") -> str:
    """:func:`in_batch` as SQL text for hand-written queries: ``marker`` (the batch id's
    parameter) appears three times (``?`` markers need the id three times)."""
    return (
        f"{table}.id BETWEEN (SELECT ranged.code_id_from FROM batch ranged WHERE ranged.id = {marker}) "
        f"AND (SELECT ranged.code_id_to FROM batch ranged WHERE ranged.id = {marker}) "
        f"AND {table}.batch_id = {marker}"
    )


class LogEntry(Base):
    """One logged act. Each entry's hash covers its content and the previous entry's
    hash in its chain, so an entry altered, removed or inserted behind the tool's back shows.

    ``chain`` is 0 for the register's own chain (entries of no series, series added,
    and every entry written before the log was chained per series) and a series' id for
    that series' chain; each chain is appended under its own lock (:class:`LogChain`).

    A series' entries are found by its chain (``chain`` = its id, the index on ``chain, id``)
    and, on the register's chain, by ``series_id`` (an index over chain 0 only: a series'
    adding, and entries written before the log was chained per series): an entry on a
    series' chain costs no second index entry for its series (:func:`series_arms`). The hash
    has no index: the chains, not its uniqueness, prove the log (migration fewer_pages)."""

    __tablename__ = "log_entry"
    __table_args__ = (
        Index(None, "series_id", "id", info={"where": "chain = 0"}), Index(None, "code"), Index(None, "batch_id"),
        Index(None, "chain", "id"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    at: Mapped[datetime] = mapped_column(UTCDateTime())
    actor: Mapped[str] = mapped_column(String(120))
    action: Mapped[str] = mapped_column(String(32))
    series_id: Mapped[int | None] = mapped_column(ForeignKey("series.id"), default=None)
    code: Mapped[str | None] = mapped_column(String(100), default=None)
    batch_id: Mapped[int | None] = mapped_column(ForeignKey("batch.id"), default=None)
    #: JSON text with the act's particulars (reason, count, first/last code, ...)
    detail: Mapped[str] = mapped_column(Text, default="{}")
    prev_hash: Mapped[str] = mapped_column(String(64))
    hash: Mapped[str] = mapped_column(String(64))
    #: the database login that appended it (PostgreSQL's session_user); None on SQLite
    login: Mapped[str | None] = mapped_column(String(120), default=None)
    #: the chain it belongs to: 0 the register's, otherwise the series' id
    chain: Mapped[int] = mapped_column(Integer, default=0, server_default="0")


def series_arms(series_id: Any) -> tuple[Any, Any]:
    """The log entries naming series ``series_id`` (a value), in two parts each served by
    an index: its chain (``chain, id``), and the entries on the register's chain that name
    it (its adding; entries from before the chains: the partial ``series_id, id``)."""
    register_chain = literal_column("0", Integer)  # written out, as the index's clause: a bound 0 matches no index
    return LogEntry.chain == series_id, and_(LogEntry.chain == register_chain, LogEntry.series_id == series_id)


def import_batches() -> Any:
    """Batches that are imports, written as the partial index over a series' import batches
    says it (a bound value would match no index)."""
    return Batch.kind == literal_column("'import'", String(16))


class LogChain(Base):
    """One row per chain holding its newest entry; a writer locks its chain's row to append."""

    __tablename__ = "log_chain"

    chain: Mapped[int] = mapped_column(Integer, primary_key=True, autoincrement=False)
    last_id: Mapped[int] = mapped_column(BigInteger, default=0)
    last_hash: Mapped[str] = mapped_column(String(64))


class LogLeaf(Base):
    """An entry's place among the leaves of the log's Merkle tree, given once when the
    entry is sealed and never changed: leaves 0..n-1 are the tree of size n."""

    __tablename__ = "log_leaf"
    __table_args__ = (Index(None, "chain", "entry_id"),)

    position: Mapped[int] = mapped_column(BigInteger, primary_key=True, autoincrement=False)
    entry_id: Mapped[int] = mapped_column(ForeignKey("log_entry.id"), unique=True)
    chain: Mapped[int] = mapped_column(Integer)


class LogTree(Base):
    """A single row: how many leaves are sealed; the sealing step locks it."""

    __tablename__ = "log_tree"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    size: Mapped[int] = mapped_column(BigInteger, default=0)


#: stock count states
COUNT_OPEN = "open"
COUNT_CLOSED = "closed"


class StockCount(Base):
    """A stocktake that spans days: what is expected (a series, narrowed to a place, a
    range, a batch or a holder), the scan files added to it, and its frozen result."""

    __tablename__ = "stock_count"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(64), unique=True)
    series_id: Mapped[int] = mapped_column(ForeignKey("series.id"))
    #: all | where | range | batch | holder
    scope: Mapped[str] = mapped_column(String(16))
    #: the place or holder of a ``where`` or ``holder`` count
    scope_text: Mapped[str | None] = mapped_column(String(200), default=None)
    #: base numbers of a ``range`` count, or the batch id (in ``scope_first``)
    scope_first: Mapped[int | None] = mapped_column(BigInteger, default=None)
    scope_last: Mapped[int | None] = mapped_column(BigInteger, default=None)
    #: the time zone of scan times written without one (an IANA name or an offset)
    zone: Mapped[str] = mapped_column(String(64))
    state: Mapped[str] = mapped_column(String(16), default=COUNT_OPEN)
    opened_at: Mapped[datetime] = mapped_column(UTCDateTime())
    opened_by: Mapped[str] = mapped_column(String(120))
    closed_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    closed_by: Mapped[str | None] = mapped_column(String(120), default=None)
    #: JSON text of the result, written when the count closes
    result: Mapped[str | None] = mapped_column(Text, default=None)


class StockCountFile(Base):
    """One scan file added to a count; its digest makes a second adding of it a refusal."""

    __tablename__ = "stock_count_file"
    __table_args__ = (UniqueConstraint("count_id", "digest"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    count_id: Mapped[int] = mapped_column(ForeignKey("stock_count.id"))
    digest: Mapped[str] = mapped_column(String(64))
    name: Mapped[str] = mapped_column(String(200))
    scanner: Mapped[str | None] = mapped_column(String(200), default=None)
    zone: Mapped[str] = mapped_column(String(64))
    scans: Mapped[int] = mapped_column(Integer)
    blank_lines: Mapped[int] = mapped_column(Integer, default=0)
    comment_lines: Mapped[int] = mapped_column(Integer, default=0)
    added_at: Mapped[datetime] = mapped_column(UTCDateTime())
    added_by: Mapped[str] = mapped_column(String(120))


class StockCountScan(Base):
    """One scanned line of a count's file, as read (the reading against the register
    happens when the count is looked at, so later voids and moves are seen)."""

    __tablename__ = "stock_count_scan"
    __table_args__ = (Index(None, "count_id", "file_id", "line"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    count_id: Mapped[int] = mapped_column(ForeignKey("stock_count.id"))
    file_id: Mapped[int] = mapped_column(ForeignKey("stock_count_file.id"))
    line: Mapped[int] = mapped_column(Integer)
    scanned: Mapped[str] = mapped_column(String(200))
    seen_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    seen_where: Mapped[str | None] = mapped_column(String(200), default=None)
class AccessToken(Base):
    """A bearer token for the HTTP service. Only a slow hash of its secret is kept; the
    token's name is the actor the log records for what it does."""

    __tablename__ = "access_token"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(64), unique=True)
    #: the public half of the token, to find its row without trying every hash
    lookup: Mapped[str] = mapped_column(String(32), unique=True)
    role: Mapped[str] = mapped_column(String(16))
    salt: Mapped[bytes] = mapped_column(LargeBinary)
    digest: Mapped[bytes] = mapped_column(LargeBinary)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime())
    created_by: Mapped[str] = mapped_column(String(120))
    revoked_at: Mapped[datetime | None] = mapped_column(UTCDateTime(), default=None)
    revoked_by: Mapped[str | None] = mapped_column(String(120), default=None)
