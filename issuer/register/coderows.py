"""Writing an issue's code rows: one statement for a chunk of codes, whatever its size.

Every issue — one code at a counter, a replacement, a million for a print run — writes
its rows here. What varies from row to row is only the code and its base number; the
rest (series, batch, status, holder, note, validity, ...) is the batch's and is bound
once per statement. The codes and numbers travel as two values the database unpacks
itself, so no per-row tuple is built in Python and the driver binds two parameters per
chunk instead of a dozen per row (with ``executemany``, binding was most of the cost
of a bulk batch on SQLite):

* PostgreSQL: the codes and the numbers each as one text, split on spaces
  (``string_to_array``; a canonical code holds no separator) and ``unnest``-ed together
  ``WITH ORDINALITY``, ordered by it so ids follow the order the codes were handed in.
  Two texts rather than two arrays: the driver dumps a Python list item by item, which
  cost a one-code issue more than the rest of its statement;
* SQLite (no arrays): the numbers as a JSON array read by ``json_each``, and the codes
  as one ASCII byte string cut by position (``substr`` on a BLOB is by byte, so each
  row costs the same) and cast back to text. A batch's codes all have their series'
  width. ``json_each`` yields the array in order; the statement has no ``ORDER BY``
  because SQLite would sort the rows again for it (it cannot tell they are in order).

Codes given holder or note text each get their own salt (``text_salt``): a third value
that travels the same way (on PostgreSQL a text of hex salts split on spaces, on SQLite a
blob of 16-byte pieces). A batch without text runs the same statement built without that
column, so it costs nothing.

The statements are compiled once each (:class:`~issuer.register.driver.Prepared`);
they name the same columns and fill them from the same values.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from datetime import datetime
from typing import Any, cast

from sqlalchemy import (
    ARRAY,
    BigInteger,
    Connection,
    Integer,
    String,
    Table,
    Text,
    bindparam,
    insert,
    literal_column,
    select,
)
from sqlalchemy import cast as sql_cast
from sqlalchemy import func as sql_func

from issuer.register.driver import Prepared
from issuer.register.models import ISSUED, IssuedCode
from issuer.register.standing import SALT_BYTES

_CODE = cast(Table, IssuedCode.__table__)
#: what separates the codes and numbers handed to PostgreSQL (a separator: never in a code)
SPACE = " "

#: the columns a newly issued row fills besides ``code`` and ``base`` (when and by whom is
#: the batch row's to say: ``origin_at``/``origin_by`` stay empty)
BATCH_VALUES = (
    "series_id", "status", "batch_id", "holder", "note", "replaces_id", "print_count",
    "holder_key", "note_key", "valid_until",
)  # fmt: skip


def _same_for_every_row() -> list[Any]:
    """The batch's values, one parameter each, typed as their columns (so a time is
    bound as the column stores it)."""
    return [bindparam(name, type_=_CODE.c[name].type) for name in BATCH_VALUES]


def _writing(source: Any, code: Any, base: Any, salt: Any = None, order: Any = None) -> Prepared:
    """The statement; ``salt`` None: without the salt column (a batch without text)."""
    salted = () if salt is None else (salt,)
    chosen = select(*_same_for_every_row(), code, base, *salted).select_from(source)
    if order is not None:
        chosen = chosen.order_by(order)
    columns = [*BATCH_VALUES, "code", "base", *("text_salt" for _ in salted)]
    return Prepared(insert(_CODE).from_select(columns, chosen))


def _postgresql(salted: bool) -> Prepared:
    def split(name: str) -> Any:
        return sql_func.string_to_array(bindparam(name, type_=Text()), literal_column(f"'{SPACE}'"))

    given = [split("codes"), sql_cast(split("bases"), ARRAY(BigInteger())), *([split("salts")] if salted else [])]
    pairs = (
        sql_func.unnest(*given)
        .table_valued("code", "base", *(["salt"] if salted else []), with_ordinality="at")
        .render_derived(name="given")
    )
    salt = sql_func.decode(pairs.c.salt, literal_column("'hex'")) if salted else None
    return _writing(pairs, pairs.c.code, pairs.c.base, salt, order=pairs.c.at)


def _sqlite(salted: bool) -> Prepared:
    numbers = sql_func.json_each(bindparam("bases")).table_valued("key", "value").alias("given")
    width = bindparam("width", type_=Integer())
    piece = sql_func.substr(bindparam("codes"), numbers.c.key * width + 1, width)
    salt = sql_func.substr(bindparam("salts"), numbers.c.key * SALT_BYTES + 1, SALT_BYTES) if salted else None
    return _writing(numbers, sql_cast(piece, String()), numbers.c.value, salt)


#: (dialect, whether the codes get salts) -> the statement
_WRITE = {(dialect, salted): make(salted) for dialect, make in (("postgresql", _postgresql), ("sqlite", _sqlite))
          for salted in (False, True)}  # fmt: skip


def _unpacked(
    dialect: str, codes: Sequence[str], bases: Sequence[int], salts: Sequence[bytes] | None
) -> dict[str, Any]:
    """The codes, numbers and salts as the dialect's statement takes them; the same rules
    on every backend, though each form needs only one of them."""
    if len(set(map(len, codes))) != 1:
        raise ValueError("the codes of one batch must all have the same width")
    joined = "".join(codes)
    if SPACE in joined:  # a canonical code never holds one
        raise ValueError("a code to write holds a space")
    if dialect != "sqlite":
        return {"codes": SPACE.join(codes), "bases": SPACE.join(map(str, bases)),
                "salts": None if salts is None else SPACE.join(salt.hex() for salt in salts)}  # fmt: skip
    return {
        "codes": joined.encode("ascii"),
        "width": len(codes[0]),
        "bases": json.dumps(list(bases)),
        "salts": None if salts is None else b"".join(salts),
    }


def write_codes(
    connection: Connection,
    *,
    series_id: int,
    batch_id: int,
    codes: Sequence[str],
    bases: Sequence[int],
    holder: str | None = None,
    note: str | None = None,
    holder_key: str | None = None,
    note_key: str | None = None,
    replaces_id: int | None = None,
    valid_until: datetime | None = None,
    salts: Sequence[bytes] | None = None,
) -> None:
    """Insert the rows of ``codes`` (with their ``bases``, in issue order: their ids follow
    it) for batch ``batch_id``; every row gets the same holder, note and validity, and its
    own text salt from ``salts`` (None: no text, no salt). Nothing is read back, so in a
    pipeline (:func:`~issuer.register.driver.pipeline_to_commit`) the statement goes out
    without a wait."""
    if len(codes) != len(bases) or (salts is not None and len(salts) != len(codes)):
        raise ValueError("one base number per code, and one salt per code if any")
    if not codes:
        return
    statement = _WRITE[(connection.dialect.name, salts is not None)]
    values = {
        "series_id": series_id, "status": ISSUED, "batch_id": batch_id, "holder": holder, "note": note,
        "replaces_id": replaces_id, "print_count": 0, "holder_key": holder_key, "note_key": note_key,
        "valid_until": valid_until, **_unpacked(connection.dialect.name, codes, bases, salts),
    }  # fmt: skip
    statement.send(connection, values)


__all__ = ["BATCH_VALUES", "write_codes"]
