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
    """The text of one of the project's SQL files.

    Parameters
    ----------
    name : str
        File name without extension, e.g. ``"evaluate"`` for ``sql/evaluate.sql``.

    Returns
    -------
    str
        The file's text (UTF-8).
    """
    return (sql_dir() / f"{name}.sql").read_text(encoding="utf-8")


def parquet_relation(con, files):
    """A DuckDB relation over Parquet files, their columns united by name.

    Parameters
    ----------
    con : duckdb.DuckDBPyConnection
        The connection to read with.
    files : str, Path or list of them
        The Parquet files. The paths travel as values, never inside SQL text, so a path
        holding a quote, a semicolon or glob characters reads as itself.

    Returns
    -------
    duckdb.DuckDBPyRelation
        The relation over all the files.

    Raises
    ------
    ValueError
        When no file is given.
    """
    files = [str(f) for f in ([files] if isinstance(files, str) else files)]
    if not files:
        raise ValueError("no Parquet files to read")
    return con.read_parquet(files, union_by_name=True)


def parquet_view(con, name: str, files) -> None:
    """Create (or replace) a view over Parquet files (see :func:`parquet_relation`).

    Parameters
    ----------
    con : duckdb.DuckDBPyConnection
        The connection to create the view on.
    name : str
        Name of the view: an identifier chosen by the code, never by the user.
    files : str, Path or list of them
        The Parquet files.
    """
    parquet_relation(con, files).create_view(name, replace=True)


def write_parquet_from(relation, path) -> None:
    """Write a DuckDB relation to a Parquet file, streaming record batches with pyarrow.

    Parameters
    ----------
    relation : duckdb.DuckDBPyRelation
        The rows to write.
    path : str or Path
        The Parquet file to write.

    Notes
    -----
    ``COPY ... TO`` would need the path in SQL text or a bound parameter that older DuckDB
    releases refuse, hence the record-batch reader.
    """
    import pyarrow.parquet as pq

    reader = (relation.to_arrow_reader() if hasattr(relation, "to_arrow_reader")  # newer DuckDB
              else relation.fetch_record_batch())
    with pq.ParquetWriter(str(path), reader.schema) as writer:
        for batch in reader:
            writer.write_batch(batch)
