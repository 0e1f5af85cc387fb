"""The worst sites of a run, chosen and told in words, for the workbook's Summary and the report's brief.

Both read a Deficiencies table already in the run's output units (``shortfall_m`` or
``shortfall_ft`` and so on); the sentences take the unit from the column names, so they
never convert anything themselves.
"""

from __future__ import annotations

import pandas as pd

__all__ = ["number_word", "site_text", "worst_sites", "worst_sites_heading"]

_WORDS = ("no", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine")


def number_word(n: int) -> str:
    """A count as a reader writes it: in words below ten, in figures from ten (common style, no
    single source)."""
    return _WORDS[n] if 0 <= n < len(_WORDS) else f"{n:,}"


def worst_sites(defs: pd.DataFrame, n: int = 5) -> pd.DataFrame:
    """The worst deficient sites: one row per curve (its best-ranked direction), by rank.

    Parameters
    ----------
    defs : pandas.DataFrame
        The Deficiencies table (``rank``, ``road_id``, ``curve_no``, ``verdict``, ...).
    n : int, optional
        How many sites.

    Returns
    -------
    pandas.DataFrame
        At most ``n`` rows of ``defs`` whose verdict is deficient, rank 1 first.
    """
    if not len(defs) or not {"rank", "road_id", "curve_no"} <= set(defs.columns):
        return defs.iloc[0:0]
    d = defs[defs["verdict"] == "deficient"] if "verdict" in defs else defs
    # one site per curve; roadside rows (no vertical curve) one per horizontal curve
    key = ["road_id", "curve_no"] + [c for c in ("kind", "hcurve_no") if c in d.columns]
    return d.sort_values("rank").drop_duplicates(key).head(n)


def worst_sites_heading(n: int) -> str:
    """The sentence that introduces ``n`` worst sites: "The five worst sites, in the order to treat
    them:" (the one worst site: "The worst site:"); empty for none."""
    if n <= 0:
        return ""
    return "The worst site:" if n == 1 else f"The {number_word(n)} worst sites, in the order to treat them:"


def site_text(r: pd.Series) -> str:
    """One worst site in words: road and name, curve, what is hidden, shortfall, treatment hint.

    Parameters
    ----------
    r : pandas.Series
        A row of the Deficiencies table in the run's output units (``shortfall_m`` and
        ``ssd_required_m``, or ``shortfall_ft`` and ``ssd_required_ft``).

    Returns
    -------
    str
        One sentence, lengths in the unit of the row's columns.
    """
    unit = "ft" if "shortfall_ft" in r.index else "m"
    name = r.get("road_name")
    road = f"{r['road_id']} {name}" if isinstance(name, str) and name else str(r["road_id"])
    kind = f" ({r['kind']})" if isinstance(r.get("kind"), str) else ""
    hazard, detail = r.get("hidden_hazard"), r.get("hazard_detail")
    if not isinstance(hazard, str) or hazard == "none":
        hidden = "hides no junction or bend, only the road ahead"
    else:
        hidden = f"hides a {hazard}" + (f" ({detail})" if isinstance(detail, str) and detail else "")
    need = r.get(f"ssd_required_{unit}")
    short = f"sight distance {float(r[f'shortfall_{unit}']):.0f} {unit} short" \
        + (f" of the {float(need):.0f} {unit} required" if pd.notna(need) else "")
    hint = r.get("treatment_hint")
    cno, hno = r.get("curve_no"), r.get("hcurve_no")
    where = f"curve {int(cno)}" if pd.notna(cno) else (
        f"horizontal curve {int(hno)}" if pd.notna(hno) and hno else "roadside")  # roadside rows: 3D sight lines
    if r.get("kind") == "roadside":
        hidden = f"{r.get('limit_kind')} blocks the view of the road ahead"
    return f"{road}, {where}{kind}: {hidden}; {short}" \
        + (f"; {hint}" if isinstance(hint, str) and hint else "") + "."
