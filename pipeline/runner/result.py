"""A finished network run, read back from the work folder with DuckDB, and its accounting.

The chunk results stay on disk in the work folder; :class:`NetworkResult` reads its tables
from the chunk files on demand. :func:`accounting` checks that every road ends either
evaluated or skipped with a reason.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import duckdb
import pandas as pd

from ..core.sqlrun import parquet_relation, parquet_view, sql_text
from ..ingest.readers import Roads
from .chunks import typed_table
from .workfolder import WorkFolder


@dataclass
class NetworkResult:
    """A finished network run: the roads, where the chunk results are, and the verdicts."""

    roads: Roads
    work: WorkFolder
    timings: dict[str, float]
    ground_info: dict
    notes: list[str]
    criteria: object = None
    evaluation: object = None
    step_m: float = 5.0
    chunks: dict = field(default_factory=dict)
    evidence: dict = field(default_factory=dict)  # what the inputs say (pipeline.runner.evidence)
    extra_notes: pd.DataFrame | None = None  # per-road notes made before the chunks (substituted speeds)

    def _read(self, name: str) -> pd.DataFrame:
        files = self.work.files(name)
        if not files:
            return typed_table(name, None)
        with duckdb.connect() as con:
            frame = parquet_relation(con, files).df()
        return frame if len(frame) else typed_table(name, None)

    def _order(self, frame: pd.DataFrame, by: list[str]) -> pd.DataFrame:
        pos = {r: i for i, r in enumerate(self.roads.table["road_id"])}
        frame = frame.assign(_o=frame["road_id"].map(pos)).sort_values(["_o"] + by, kind="stable")
        return frame.drop(columns="_o").reset_index(drop=True)

    @property
    def profiles(self) -> pd.DataFrame:
        """Every station of every road (read in full: for small networks and tests), in road order."""
        return self._order(self._read("profiles"), ["chainage_m"])

    def road_profile(self, road_id: str) -> pd.DataFrame:
        """The stations of one road.

        Parameters
        ----------
        road_id : str
            The road.

        Returns
        -------
        pandas.DataFrame
            Its stations by chainage (empty, with the station columns, when it has none).
        """
        return self.road_profiles([road_id]).get(road_id, typed_table("profiles", None))

    def road_profiles(self, road_ids) -> dict[str, pd.DataFrame]:
        """The stations of several roads, read in one pass over the chunk files.

        Parameters
        ----------
        road_ids : iterable of str
            The roads.

        Returns
        -------
        dict of str to pandas.DataFrame
            Each road's stations by chainage, for the roads that have any.
        """
        ids = sorted({str(r) for r in road_ids})
        if not ids:
            return {}
        with duckdb.connect() as con:
            con.register("wanted", pd.DataFrame({"road_id": ids}))
            parquet_view(con, "stations", self.work.files("profiles"))
            frame = con.sql("SELECT p.* FROM stations p JOIN wanted USING (road_id) ORDER BY road_id, chainage_m").df()
        return {rid: g.reset_index(drop=True) for rid, g in frame.groupby("road_id", sort=False)}

    @property
    def curves(self) -> pd.DataFrame:
        """The vertical curves of every road, in road order."""
        return self._order(self._read("curves"), ["curve_no"])

    @property
    def hcurves(self) -> pd.DataFrame:
        """The horizontal curves of every road, in road order."""
        return self._order(self._read("hcurves"), ["hcurve_no"])

    @property
    def hazards(self) -> pd.DataFrame:
        """The hazards found in the hidden zones."""
        return self._read("hazards")

    @property
    def keypoints(self) -> pd.DataFrame:
        """The stations where sight distance is shortest on each curve."""
        return self._read("keypoints")

    def status(self) -> pd.DataFrame:
        """What became of each road.

        Returns
        -------
        pandas.DataFrame
            One row per road: status (evaluated or skipped), reason, ground spacing and
            resolution.
        """
        return self._read("status")

    @property
    def clearances(self) -> pd.DataFrame:
        """What to clear where the 3D sight falls short (the 3D stage's rows), in road order."""
        return self._order(self._read("clearances"), ["direction", "from_m"])

    def road_table(self) -> pd.DataFrame:
        """The roads with their speeds and what became of them, in input order.

        Returns
        -------
        pandas.DataFrame
            One row per road in the roads file.
        """
        t = self.roads.table
        st = self.status().set_index("road_id")
        return pd.DataFrame({
            "road_id": t["road_id"],
            "name": t["name"],
            "road_class": t["road_class"],
            "aadt": t["aadt"],
            "speed_kmh": t["speed_kmh"],
            "speed_basis": t["speed_basis"],
            "length_m": t["length_m"].round(2),
            "status": st["status"].reindex(t["road_id"]).to_numpy(),
            "reason": st["reason"].reindex(t["road_id"]).to_numpy(),
            "ground_spacing_m": st["ground_spacing_m"].reindex(t["road_id"]).to_numpy(dtype=float),
            "resolution_m": st["resolution_m"].reindex(t["road_id"]).to_numpy(dtype=float),
        })

    def data_notes(self) -> pd.DataFrame:
        """Notes on the data, road by road (those made before the chunks first).

        Returns
        -------
        pandas.DataFrame
            One row per note, in road order.
        """
        notes = self._read("notes")
        if self.extra_notes is not None and len(self.extra_notes):
            notes = pd.concat([self.extra_notes.astype(notes.dtypes.to_dict()), notes], ignore_index=True)
        return self._order(notes, [])


def accounting(result: NetworkResult) -> dict:
    """Counts of roads in, evaluated and skipped (with reasons); checks they add up.

    Parameters
    ----------
    result : NetworkResult
        A finished run.

    Returns
    -------
    dict
        ``in``, ``evaluated``, ``skipped``, ``skipped_by_reason`` (count per reason) and
        ``skipped_roads`` (road id and reason, in input order).

    Raises
    ------
    RuntimeError
        When the roads in are not exactly the roads evaluated plus the roads skipped.
    """
    n_in = len(result.roads.table)
    st = result.status()
    evaluated = st[st["status"] == "evaluated"]
    skipped = st[st["status"] == "skipped"]
    if n_in != len(evaluated) + len(skipped) or len(st) != n_in or set(st["road_id"]) != set(result.roads.table["road_id"]):
        raise RuntimeError(f"road accounting broken: {n_in} in, {len(evaluated)} evaluated, {len(skipped)} skipped")
    order = {r: i for i, r in enumerate(result.roads.table["road_id"])}
    skipped = skipped.assign(_o=skipped["road_id"].map(order)).sort_values("_o")
    by_reason: dict[str, int] = {}
    for reason in skipped["reason"]:
        by_reason[reason] = by_reason.get(reason, 0) + 1
    return {
        "in": n_in,
        "evaluated": int(len(evaluated)),
        "skipped": int(len(skipped)),
        "skipped_by_reason": by_reason,
        "skipped_roads": [{"road_id": r, "reason": w} for r, w in zip(skipped["road_id"], skipped["reason"])],
    }


def network_summary(result: NetworkResult) -> pd.DataFrame:
    """Roads and km in and evaluated, and ground coverage, by road class (``sql/network_summary.sql``).

    Parameters
    ----------
    result : NetworkResult
        A finished run.

    Returns
    -------
    pandas.DataFrame
        One row per road class.
    """
    with duckdb.connect() as con:
        con.register("roads", result.road_table())
        parquet_relation(con, result.work.files("profiles")).project(
            "road_id, chainage_m, ground_flag").create_view("stations")
        return con.sql(sql_text("network_summary")).df()
