"""Write the audit's output files.

Outputs go into a staging folder beside the requested one and are moved into
place only when every file is written, so a failed run leaves the previous
output as it was and never a folder that looks complete.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError


@contextlib.contextmanager
def staging_folder(final: Path):
    """Yield a temporary folder; on success it replaces ``final``.

    An existing ``final`` is replaced only if it is empty or an earlier output
    of this tool (it holds ``run.json``), never an unrelated folder.
    """
    final = Path(final).resolve()
    if final.exists():
        if not final.is_dir():
            raise InputError(f"{final}: exists and is a file; choose a folder for --out")
        if any(final.iterdir()) and not (final / "run.json").is_file():
            raise InputError(f"{final}: folder is not empty and holds no earlier audit output; choose another --out")
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.partial-", dir=final.parent))
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = None
    if final.exists():
        old = final.parent / f".{final.name}.old-{os.getpid()}"
        if old.exists():
            shutil.rmtree(old)
        final.rename(old)
    tmp.rename(final)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def _json_default(obj):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return None if not np.isfinite(obj) else float(obj)
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"cannot write {type(obj).__name__} to JSON")


def write_run_json(path: Path, summary: dict) -> None:
    path.write_text(json.dumps(summary, indent=2, default=_json_default) + "\n", encoding="utf-8")


def write_profiles(path: Path, profiles: pd.DataFrame) -> None:
    profiles.to_parquet(path, index=False)


def curves_for_csv(curves: pd.DataFrame) -> pd.DataFrame:
    """Curve table rounded for reading: chainages and elevations to the millimetre, grades to
    1e-4 %, K to 0.01."""
    out = curves.copy()
    for col in ("pvc_m", "pvi_m", "pvt_m", "pvi_elev_m", "length_m", "fit_rmse_m", "turn_m", "turn_elev_m"):
        if col in out:
            out[col] = out[col].astype(float).round(3)
    for col in ("g1_pct", "g2_pct", "a_pct"):
        if col in out:
            out[col] = out[col].astype(float).round(4)
    if "k" in out:
        out["k"] = out["k"].astype(float).round(2)
    return out


def write_outputs(folder: Path, result, summary: dict) -> None:
    """Every output file of the run, into ``folder``."""
    write_profiles(folder / "profiles.parquet", result.profiles)
    curves_for_csv(result.curves).to_csv(folder / "curves.csv", index=False)
    result.road_table().to_csv(folder / "roads.csv", index=False)
    result.data_notes().to_csv(folder / "data_notes.csv", index=False)
