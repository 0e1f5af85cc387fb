"""The run's own files: the staging folder the outputs are written into, and ``run.json``.

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

from ..core.errors import InputError


@contextlib.contextmanager
def staging_folder(final: Path):
    """Yield a temporary folder; on success it replaces ``final``.

    An existing ``final`` is replaced only if it is empty or an earlier output
    of this tool (it holds ``run.json``), never an unrelated folder.

    Parameters
    ----------
    final : pathlib.Path
        The output folder asked for (``--out``).

    Yields
    ------
    pathlib.Path
        A new folder beside ``final`` (``.NAME.partial-*``); removed if the block
        raises, moved into the place of ``final`` if it completes.

    Raises
    ------
    InputError
        ``final`` is a file, or a folder that is not empty and holds no earlier output.
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
    _replace(final, tmp)


def _replace(final: Path, tmp: Path) -> None:
    """Move ``tmp`` into the place of ``final``, the old folder aside until then."""
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
    """Write the run summary as ``run.json``.

    Parameters
    ----------
    path : pathlib.Path
        The file to write.
    summary : dict
        The run summary; numpy scalars become numbers (non-finite ones ``null``)
        and paths strings.

    Returns
    -------
    None
        Indented JSON, UTF-8, ending in a newline.
    """
    path.write_text(json.dumps(summary, indent=2, default=_json_default) + "\n", encoding="utf-8")
