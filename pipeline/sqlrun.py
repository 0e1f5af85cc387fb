"""Run the project's SQL files (``sql/*.sql``) in an in-process DuckDB.

Tables are handed over as pandas DataFrames registered under the names the
SQL file documents at its top; the result comes back as a DataFrame. Only
core DuckDB SQL is used (no extensions).
"""

from __future__ import annotations

import duckdb
import pandas as pd

from .resources import sql_dir


def sql_text(name: str) -> str:
    """The text of ``sql/<name>.sql``."""
    return (sql_dir() / f"{name}.sql").read_text(encoding="utf-8")


def run_sql(name: str, tables: dict[str, pd.DataFrame], con: duckdb.DuckDBPyConnection | None = None) -> pd.DataFrame:
    """Run ``sql/<name>.sql`` over ``tables`` and return its result."""
    own = con is None
    con = con or duckdb.connect()
    try:
        for tname, frame in tables.items():
            con.register(tname, frame)
        return con.sql(sql_text(name)).df()
    finally:
        for tname in tables:
            con.unregister(tname)
        if own:
            con.close()
