"""The optional surface model (trees, buildings) for the 3D sight lines: opened like the DEM,
read a window at a time onto the DEM window's cells."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..core.config import Config
from ..core.errors import InputError
from ..core.units import metres_per
from .files import check_file
from .ground import DEM_SUFFIXES, DemGround, _open_dem, map_to_pixel, read_dem_window


def open_surface(cfg: Config) -> DemGround | None:
    """The surface model named by ``sight.surface``, described (no cells read).

    Parameters
    ----------
    cfg : Config
        The run's settings (``sight.surface``; ``ground.*`` for its CRS when the file has none,
        its band and its height unit, which are those of the DEM).

    Returns
    -------
    DemGround or None
        The raster, or ``None`` where no surface model is set.

    Raises
    ------
    InputError
        Where the file is missing or is not a raster.
    """
    text = cfg["sight.surface"]
    if not text:
        return None
    path = check_file(text, "surface model")
    if Path(path).suffix.lower() not in DEM_SUFFIXES:
        raise InputError(f"{path}: the surface model (sight.surface, --surface) must be a raster "
                         f"({', '.join(sorted(DEM_SUFFIXES))})")
    return _open_dem(Path(path), cfg, metres_per(cfg["ground.elevation_unit"]))


def surface_on_cells(surface: DemGround, shape: tuple[int, int], transform) -> np.ndarray | None:
    """The surface model on a DEM window's cells (nearest surface cell to each cell centre).

    Parameters
    ----------
    surface : DemGround
        The surface model, in the DEM's CRS.
    shape : tuple of int
        The DEM window's rows and columns.
    transform : affine.Affine
        The DEM window's transform.

    Returns
    -------
    numpy.ndarray or None
        Heights (m) per DEM cell, NaN where the surface model has none; ``None`` where it does
        not reach the window.
    """
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    x, y = transform * (cols.ravel() + 0.5, rows.ravel() + 0.5)
    x, y = np.asarray(x), np.asarray(y)
    arr, aff = read_dem_window(surface, x[[0, -1]], y[[0, -1]], margin=2)
    if arr is None:
        return None
    c, r = map_to_pixel(aff, x, y)
    c, r = np.floor(c).astype(np.int64), np.floor(r).astype(np.int64)
    inside = (r >= 0) & (c >= 0) & (r < arr.shape[0]) & (c < arr.shape[1])
    out = np.full(x.shape, np.nan)
    out[inside] = arr[r[inside], c[inside]]
    return out.reshape(shape)


def check_sight_settings(cfg: Config) -> None:
    """Stop a run at once on 3D sight settings it cannot use.

    Parameters
    ----------
    cfg : Config
        The run's settings (``sight.traffic_side``, ``sight.surface``).

    Raises
    ------
    InputError
        A traffic side other than 'right' or 'left', or a surface model that cannot be read.
    """
    if cfg["sight.traffic_side"] not in ("right", "left"):
        raise InputError(f"sight.traffic_side is {cfg['sight.traffic_side']!r}; set it to 'right' or 'left'")
    open_surface(cfg)
