"""The project's SQL files (``sql/*.sql``), run by an in-process DuckDB.

Each file documents at its top the tables it needs (registered from DataFrames, or views
over Parquet files) and what it makes. Only core DuckDB SQL is used (no extensions).
"""

from __future__ import annotations

from .resources import sql_dir


def sql_text(name: str) -> str:
    """The text of ``sql/<name>.sql``."""
    return (sql_dir() / f"{name}.sql").read_text(encoding="utf-8")
