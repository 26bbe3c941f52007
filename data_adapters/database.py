"""Price history from a database through SQLAlchemy, read-only, with bound parameters.

``[data] url`` names the database (``url_env`` the environment variable holding the URL, so a
password stays out of the book): ``sqlite:///prices.db`` (a file, relative to the book's folder;
the embedded default) or ``postgresql+psycopg://user@host:5432/db`` (a team server; needs the
``psycopg`` package, ``pip install "basiswise[postgres]"``). ``table`` (and ``db_schema``)
holds the prices in the wide or long layout of a CSV file.

Safety: the connection is opened read-only where the driver allows it (SQLite ``mode=ro`` URI;
PostgreSQL ``default_transaction_read_only``) and every transaction is rolled back. Table and
column names are checked against the database's own catalogue (SQLAlchemy inspector) and
quoted as identifiers by SQLAlchemy; the series and dates asked for are bound parameters. No
name or value is ever formatted into SQL text.
"""

from __future__ import annotations

import os
import sqlite3
from datetime import date
from pathlib import Path
from urllib.parse import quote

import pandas as pd

from basiswise.data_adapters.errors import InputError

__all__ = ["database_source", "fetch_frame", "open_engine", "read_database",
           "read_sqlite_file"]

_DIALECTS = ("sqlite", "postgresql")


def _url_text(book) -> tuple[str, str]:
    d = book.data
    if d.url is not None:
        return d.url, "data.url"
    value = os.environ.get(d.url_env or "")
    if not value:
        raise InputError(f"environment variable {d.url_env} (named by url_env) is not set",
                         file=book.source, key="data.url_env")
    return value, "data.url_env"


def open_engine(url_text: str, folder: Path | str = ".", *, key: str = "data.url",
                file: str | None = None):
    """A read-only SQLAlchemy engine for a SQLite or PostgreSQL URL (relative SQLite paths
    against ``folder``), and the URL as shown in messages (password hidden)."""
    import sqlalchemy as sa
    from sqlalchemy.engine import make_url

    try:
        url = make_url(url_text)
    except (sa.exc.ArgumentError, ValueError) as exc:
        raise InputError(f"not a database URL: {exc}", file=file, key=key) from None
    shown = url.render_as_string(hide_password=True)
    backend = url.get_backend_name()
    if backend not in _DIALECTS:
        raise InputError(f"database {backend!r} is not supported (use sqlite or postgresql, "
                         "which can be opened read-only)", file=file, key=key)
    if backend == "sqlite":
        if not url.database or url.database == ":memory:":
            raise InputError("a SQLite URL needs a file: sqlite:///prices.db", file=file, key=key)
        path = Path(url.database)
        path = path if path.is_absolute() else Path(folder) / path
        return _sqlite_engine(path, file=file, key=key), str(path)
    try:
        engine = sa.create_engine(
            url, connect_args={"options": "-c default_transaction_read_only=on",
                               "connect_timeout": 10})
    except (ImportError, sa.exc.NoSuchModuleError) as exc:
        raise InputError(f"cannot load the database driver ({exc}); install it with "
                         "pip install \"basiswise[postgres]\"", file=file, key=key) from None
    return engine, shown


def _connect(engine, shown: str, key: str, file: str | None):
    import sqlalchemy as sa

    try:
        return engine.connect()
    except sa.exc.SQLAlchemyError as exc:
        reason = str(getattr(exc, "orig", exc)).strip().splitlines()[0]
        raise InputError(f"cannot reach database {shown}: {reason}", file=file,
                         key=key) from None


def _table(conn, name: str, schema: str | None, where: str, file: str | None):
    """The reflected table, after checking its name against the catalogue."""
    import sqlalchemy as sa

    names = sa.inspect(conn).get_table_names(schema=schema)
    if name not in names:
        listed = ", ".join(sorted(names)) or "none"
        raise InputError(f"no table {name!r} in {where} (tables: {listed})", file=file,
                         key="data.table")
    return sa.Table(name, sa.MetaData(), schema=schema, autoload_with=conn)


def _column(table, name: str, key: str, file: str | None):
    if name not in table.c:
        listed = ", ".join(table.c.keys())
        raise InputError(f"no column {name!r} in table {table.name!r} (columns: {listed})",
                         file=file, key=key, column=name)
    return table.c[name]


def _bound(col, value: date):
    """A date as a bound value of the column's own kind (ISO text for text columns)."""
    import sqlalchemy as sa

    text = isinstance(col.type, sa.String)
    return sa.bindparam(None, value.isoformat() if text else value, type_=col.type)


def _query(table, book, series: list[str]):
    import sqlalchemy as sa

    d, src = book.data, book.source
    when = _column(table, d.date_column, "data.date_column", src)
    if d.format == "long":
        cols = [when, _column(table, d.series_column, "data.series_column", src),
                _column(table, d.price_column, "data.price_column", src)]
        q = sa.select(*cols).where(cols[1].in_(series))
    else:
        cols = [when] + [_column(table, s, f"series.{s}", src) for s in series]
        q = sa.select(*cols)
    if d.start is not None:
        q = q.where(when >= _bound(when, d.start))
    if d.end is not None:
        q = q.where(when <= _bound(when, d.end))
    return q.order_by(when)


def database_source(book) -> str:
    """How the book's database is named in messages (password hidden)."""
    import sqlalchemy as sa
    from sqlalchemy.engine import make_url

    text, _ = _url_text(book)
    try:
        return make_url(text).render_as_string(hide_password=True)
    except (sa.exc.ArgumentError, ValueError):
        return "database"


def read_database(book, series: list[str]):
    """The price panel of a book whose ``[data]`` names a database.

    Only the columns (wide) or rows (long) of ``series`` and the ``start``/``end`` dates are
    asked for. Raises InputError naming the key, table or column at fault: unreachable server,
    missing table or column, no rows.
    """
    from basiswise.data_adapters.prices import panel_from_frame

    d = book.data
    frame, where = fetch_frame(book, series)
    return panel_from_frame(frame, format=d.format, series=series, date_column=d.date_column,
                            series_column=d.series_column, price_column=d.price_column,
                            max_gap_days=d.max_gap_days, source=where, rows_numbered=True)


def fetch_frame(book, series: list[str]) -> tuple[pd.DataFrame, str]:
    """The rows the book's query returns (not yet aligned), and how the source is named."""
    import sqlalchemy as sa

    d = book.data
    text, key = _url_text(book)
    engine, shown = open_engine(text, book.folder, key=key, file=book.source)
    where = f"{shown}, table {d.table!r}"
    try:
        with _connect(engine, shown, key, book.source) as conn:
            table = _table(conn, d.table, d.db_schema, shown, book.source)
            try:
                result = conn.execute(_query(table, book, series))
                frame = pd.DataFrame(result.fetchall(), columns=list(result.keys()))
            except sa.exc.SQLAlchemyError as exc:
                reason = str(getattr(exc, "orig", exc)).strip().splitlines()[0]
                raise InputError(f"query failed: {reason}", file=where,
                                 key="data.table") from None
            finally:
                conn.rollback()
    finally:
        engine.dispose()
    if frame.empty:
        span = f" between {d.start or 'the start'} and {d.end or 'the end'}" \
            if d.start or d.end else ""
        raise InputError(f"the query for {', '.join(series)} returned no rows{span}",
                         file=where, key="data.table")
    frame.index = pd.RangeIndex(1, len(frame) + 1)  # result rows, in date order
    return frame, where


def _sqlite_engine(path: Path, *, file: str | None, key: str):
    """A read-only engine on a SQLite file (``mode=ro``; the path %-encoded in the URI)."""
    import sqlalchemy as sa

    if not path.is_file():
        raise InputError(f"database file {path} not found", file=file, key=key)
    # read only: a price source is never written; '%', '?' or '#' in a folder name stay literal
    uri = f"file:{quote(str(path.resolve()))}?mode=ro"
    return sa.create_engine("sqlite://", creator=lambda: sqlite3.connect(uri, uri=True))


def read_sqlite_file(path: Path, table: str, source: str) -> pd.DataFrame:
    """All rows of ``table`` in a SQLite file, as text (parsed like a CSV afterwards)."""
    import sqlalchemy as sa

    engine = _sqlite_engine(Path(path), file=source, key="data.prices")
    try:
        with engine.connect() as conn:
            tbl = _table(conn, table, None, "the database", source)
            frame = pd.DataFrame(conn.execute(sa.select(tbl)).fetchall(),
                                 columns=list(tbl.c.keys()))
            conn.rollback()
    finally:
        engine.dispose()
    return frame.astype(object).where(frame.notna(), "").astype(str)
