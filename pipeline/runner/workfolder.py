"""The work folder: chunk results on disk, and the key that says when they can be reused.

Each chunk's tables are written to Parquet files in a folder of their own, completed by
``done.json``. The folder's ``key.json`` records what the results depend on (inputs, settings
and version): a run started again with ``resume`` reuses the finished chunks only when the
key is the same.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
from pathlib import Path

from ..core.version import __version__
from ..core.config import Config
from ..ingest.readers import file_sha256
from .chunks import TABLES, typed_table

CHUNK_META = ("seconds", "points_used", "points_dropped", "sampler_notes")


class WorkFolder:
    """Where chunk results are kept, one folder per chunk, each completed by ``done.json``.

    Parameters
    ----------
    path : pathlib.Path
        The work folder (created when missing).
    key : str
        What the results depend on (:func:`run_key`).
    resume : bool
        Keep the chunks already in ``path`` when its key is ``key``; otherwise the folder is
        emptied.
    """

    def __init__(self, path: Path, key: str, resume: bool):
        self.path = Path(path)
        key_file = self.path / "key.json"
        if self.path.exists():
            same = key_file.is_file() and json.loads(key_file.read_text()).get("key") == key
            if not (resume and same):
                shutil.rmtree(self.path)
        self.path.mkdir(parents=True, exist_ok=True)
        key_file.write_text(json.dumps({"key": key}))

    def chunk(self, k: int) -> Path:
        """The folder of chunk ``k``.

        Parameters
        ----------
        k : int
            Chunk number.

        Returns
        -------
        pathlib.Path
            The chunk's folder (which may not exist yet).
        """
        return chunk_folder(self.path, k)

    def done(self, k: int) -> bool:
        """Whether chunk ``k`` is finished.

        Parameters
        ----------
        k : int
            Chunk number.

        Returns
        -------
        bool
            True when the chunk's ``done.json`` exists.
        """
        return (self.chunk(k) / "done.json").is_file()

    def write(self, k: int, result: dict) -> None:
        """Write chunk ``k``'s tables (see :func:`write_chunk`).

        Parameters
        ----------
        k : int
            Chunk number.
        result : dict
            The chunk's tables and report, as returned by ``process_chunk``.

        Returns
        -------
        None
        """
        write_chunk(self.path, k, result)

    def meta(self, k: int) -> dict:
        """What finished chunk ``k`` reported.

        Parameters
        ----------
        k : int
            Chunk number.

        Returns
        -------
        dict
            Stage seconds, ground points used and dropped, and sampler notes.
        """
        return json.loads((self.chunk(k) / "done.json").read_text())

    def files(self, name: str) -> list[str]:
        """The chunk files of table ``name`` (a list: paths never go into SQL text).

        Parameters
        ----------
        name : str
            Which table, one of :data:`pipeline.runner.chunks.TABLES`.

        Returns
        -------
        list of str
            The Parquet files, sorted by chunk.
        """
        return sorted(str(p) for p in self.path.glob(f"chunk_*/{name}.parquet"))


def chunk_folder(work_path: Path, k: int) -> Path:
    """The folder of chunk ``k`` in the work folder at ``work_path``.

    Parameters
    ----------
    work_path : pathlib.Path
        The work folder.
    k : int
        Chunk number.

    Returns
    -------
    pathlib.Path
        ``work_path / chunk_NNNNN``.
    """
    return Path(work_path) / f"chunk_{k:05d}"


def write_chunk(work_path: Path, k: int, result: dict) -> None:
    """Write one chunk's tables into the work folder at ``work_path``.

    Called from this process or from a worker; the chunk's folder is renamed into place only
    once complete.

    Parameters
    ----------
    work_path : pathlib.Path
        The work folder.
    k : int
        Chunk number.
    result : dict
        The chunk's tables (one per :data:`TABLES`) and report, as returned by ``process_chunk``.

    Returns
    -------
    None
    """
    final = chunk_folder(work_path, k)
    tmp = Path(work_path) / f".tmp_{k:05d}_{os.getpid()}"
    if tmp.exists():
        shutil.rmtree(tmp)
    tmp.mkdir()
    for name in TABLES:
        typed_table(name, result[name]).to_parquet(tmp / f"{name}.parquet", index=False)
    meta = {key: result[key] for key in CHUNK_META}
    (tmp / "done.json").write_text(json.dumps(meta))
    if final.exists():
        shutil.rmtree(final)
    tmp.rename(final)


def run_key(roads_path, ground_path, cfg: Config) -> str:
    """What the results of a run depend on: inputs, settings and the version.

    Parameters
    ----------
    roads_path, ground_path : str or pathlib.Path
        The input files.
    cfg : Config
        The run's settings; the ``run`` section (how, not what, to compute) is left out, and
        the structures, junctions and criteria files named there are hashed too.

    Returns
    -------
    str
        A SHA-256 hex digest.
    """
    h = hashlib.sha256()
    for p in (roads_path, ground_path, cfg["structures.file"], cfg["junctions.file"], *cfg["criteria.files"]):
        h.update((file_sha256(p) if p else "-").encode())
    settings = {s: v for s, v in cfg.as_dict().items() if s != "run"}
    h.update(json.dumps(settings, sort_keys=True, default=str).encode())
    h.update(__version__.encode())
    return h.hexdigest()
