"""The field sheets ``profiles.pdf``: every evaluated road's long profile, page by page.

Written only when asked for (``output.profiles_pdf``); matplotlib is imported only then.
"""

from __future__ import annotations

import numpy as np

from .figures import pyplot, road_figure


def write_profiles_pdf(path, result, units, page_m: float = 3000.0) -> int:
    """Write one long profile per evaluated road, split into pages.

    Parameters
    ----------
    path : str or pathlib.Path
        The PDF file to write.
    result : NetworkResult
        The run's result (road table, profiles, curves and inventory).
    units : OutputUnits
        The run's output units.
    page_m : float, default 3000.0
        Longest stretch of road on one page (m); a longer road is split into
        equal sheets.

    Returns
    -------
    int
        The number of pages written.
    """
    from matplotlib.backends.backend_pdf import PdfPages

    roads = result.road_table()
    evaluated = roads["status"] == "evaluated"
    pages = 0
    with PdfPages(path) as pdf:
        for rid, name in zip(roads.loc[evaluated, "road_id"], roads.loc[evaluated, "name"]):
            pages += _road_sheets(pdf, result, rid, name, units, page_m)
    return pages


def _road_sheets(pdf, result, rid, name, units, page_m: float) -> int:
    """One road's sheets into ``pdf``; returns how many (none for a road without a profile)."""
    rp = result.road_profile(rid)
    if not len(rp):
        return 0
    ev = result.evaluation
    cv = ev.curves[ev.curves["road_id"] == rid]
    rows = ev.inventory[ev.inventory["road_id"] == rid]
    end = float(rp["chainage_m"].max())
    n = max(int(np.ceil(end / page_m)), 1)
    for k in range(n):
        lo, hi = k * end / n, (k + 1) * end / n
        title = f"{rid} {name or ''}: long profile" + (f", sheet {k + 1} of {n}" if n > 1 else "")
        fig = road_figure(rp, cv, rows, units, title, lo, hi)
        pdf.savefig(fig)
        pyplot().close(fig)
    return n
