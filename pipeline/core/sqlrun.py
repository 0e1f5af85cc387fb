"""The project's SQL files (``sql/*.sql``), run by an in-process DuckDB, and the one way
Parquet files reach it.

Each file documents at its top the tables it needs (registered from DataFrames, or views
over Parquet files) and what it makes. Only core DuckDB SQL is used (no extensions). No path
or user value is ever pasted into SQL text: files are opened through DuckDB's relation API
(:func:`parquet_view`), values are registered tables or bound parameters.
"""

from __future__ import annotations

from .resources import sql_dir


def sql_text(name: str) -> str:
    """The text of ``sql/<name>.sql``."""
    return (sql_dir() / f"{name}.sql").read_text(encoding="utf-8")


def parquet_relation(con, files):
    """A DuckDB relation over Parquet ``files`` (a list of paths; columns united by name).

    The paths travel as values, never inside SQL text, so a path holding a quote, a
    semicolon or glob characters reads as itself."""
    files = [str(f) for f in ([files] if isinstance(files, str) else files)]
    if not files:
        raise ValueError("no Parquet files to read")
    return con.read_parquet(files, union_by_name=True)


def parquet_view(con, name: str, files) -> None:
    """Create (or replace) the view ``name`` over Parquet ``files`` (see :func:`parquet_relation`).
    ``name`` is an identifier chosen by the code, never by the user."""
    parquet_relation(con, files).create_view(name, replace=True)


def write_parquet_from(relation, path) -> None:
    """Write a DuckDB relation to a Parquet file at ``path``, streaming record batches with
    pyarrow (``COPY ... TO`` would need the path in SQL text or a bound parameter that older
    DuckDB releases refuse)."""
    import pyarrow.parquet as pq

    reader = (relation.to_arrow_reader() if hasattr(relation, "to_arrow_reader")  # newer DuckDB
              else relation.fetch_record_batch())
    with pq.ParquetWriter(str(path), reader.schema) as writer:
        for batch in reader:
            writer.write_batch(batch)
