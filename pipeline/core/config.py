"""Run settings: defaults, the TOML config file, and command-line overrides.

Settings are grouped in sections (``[roads]``, ``[ground]``, ``[profile]`` ...)
and addressed as ``"section.key"``. Every key has a default and a one-line
description; a config file may set any subset. An unknown section or key stops
the run (exit code 2) naming the nearest valid key, so a typo never passes
silently. Lengths are metres, speeds km/h, grades percent, unless the key's name
says otherwise.
"""

from __future__ import annotations

import copy
import difflib
import tomllib
from dataclasses import asdict, field, make_dataclass
from pathlib import Path
from typing import Any

from .errors import InputError

# checks on the inputs that checks.override may name (see pipeline.runner.evidence)
CHECKS = ("speed_unit", "elevation_unit", "coverage", "grades")

# section -> key -> (default, description). The description is what
# ``sightaudit init`` writes above the key in the example config.
SPEC: dict[str, dict[str, tuple[Any, str]]] = {
    "roads": {
        "id_column": ("road_id", "column holding each road's identifier (kept as text)"),
        "speed_column": ("speed_kmh", "column holding the speed each road is judged at"),
        "aadt_column": ("aadt", "column holding annual average daily traffic (vehicles/day)"),
        "class_column": ("road_class", "column holding the road class (for summaries and default speeds)"),
        "name_column": ("name", "column holding the road's name (optional)"),
        "layer": ("", "GeoPackage layer with the centrelines; empty = the only layer, or 'roads'"),
        "wkt_column": ("wkt", "CSV only: column with the centreline as WKT"),
        "crs": ("", "CRS of the roads file when it has none (CSV), e.g. 'EPSG:32633'"),
        "speed_unit": ("", "unit of the speed column: 'kmh' or 'mph'; empty = that of output.units (a column "
                           "name ending in the other unit then stops the run)"),
        "join_tolerance_m": (0.5, "largest gap between parts of a multi-part road that is still joined (m)"),
    },
    "ground": {
        "layer": ("", "GeoPackage layer with ground points; empty = the only layer"),
        "crs": ("", "CRS of ground points or DEM when the file has none; empty = same as roads"),
        "elevation_unit": ("m", "unit of ground elevations: 'm', 'ft' (international foot) or 'us_ft' (US survey foot)"),
        "z_column": ("z", "column holding ground elevation in a points file"),
        "max_offset_m": (15.0, "ground points farther than this from their road's centreline are dropped (m)"),
        "band": (1, "DEM band to read"),
        "vertical_error_m": (0.0, "vertical error of the ground data (m, one standard deviation); 0 = for a DEM, assumed from the cell "
                                  "size (0.10 m up to 3 m cells, 0.5 m up to 15 m, 1.5 m beyond) and reported"),
    },
    "profile": {
        "step_m": (5.0, "distance between profile stations along the road (m)"),
        "max_gap_m": (20.0, "ground gaps longer than this are left missing, shorter ones are interpolated and marked (m)"),
        "corridor_half_width_m": (12.0, "on a fine DEM the carriageway is searched for this far either side of the "
                                        "given centreline, and the profile read on it; 0 = read the centreline as given (m)"),
        "corridor_max_cell_m": (3.0, "DEMs with cells up to this show the road prism and are searched for the "
                                     "carriageway; coarser ones are filtered against the cell-crossing ripple (m)"),
        "carriageway_width_m": (7.0, "width of the carriageway with its shoulders, for the carriageway search (m)"),
    },
    "alignment": {
        "min_tangent_m": (20.0, "shortest straight piece the segmentation may create; a PVI needs this much data each side (m)"),
        "min_grade_change_pct": (0.5, "a PVI with a smaller change of grade is not kept as a vertical curve (%)"),
        "split_gap_m": (150.0, "the profile is fitted in separate stretches across data gaps longer than this (m)"),
        "short_tangent_m": (60.0, "two crests (or two sags) closer than this are flagged as broken-back (m)"),
        "bin_m": (10.0, "the number and rough place of PVIs are found on means over bins this long (m)"),
        "noise_floor_m": (0.002, "ground noise is taken as at least this when estimating it from the data (m)"),
    },
    "artefacts": {
        "spike_m": (0.5, "a sample this far from what its neighbours imply is a spike or pit, masked (m)"),
        "max_grade_pct": (20.0, "grades steeper than this between stations mark a bridge dip or hump (%)"),
        "min_k": (1.0, "curvature sharper than a vertical curve of this K marks a dip or hump (m per %)"),
        "max_width_m": (150.0, "dips and humps wider than this are not masked (m)"),
        "max_road_grade_pct": (25.0, "a road with more than 5 % of its length steeper than this is skipped (%)"),
    },
    "structures": {
        "file": ("", "known bridges and culverts (points or lines, CSV or GPKG) whose span is masked"),
        "layer": ("", "GeoPackage layer of the structures; empty = the only layer"),
        "buffer_m": (10.0, "masked beyond each end of a known structure (m)"),
        "default_length_m": (30.0, "length masked around a structure given as a point (m)"),
        "max_offset_m": (25.0, "a structure further than this from a road's centreline is not on that road (m)"),
    },
    "run": {
        "workers": (0, "processes for the per-road stages; 0 = every core, 1 = none (all in this process)"),
        "chunk_km": (200.0, "road length handed to a worker at a time; memory grows with it, not the network (km)"),
        "engine": ("local", "'local' (this machine) or 'dask' (a Dask cluster, see run.scheduler)"),
        "scheduler": ("", "address of the Dask scheduler for the dask engine, e.g. 'tcp://10.0.0.5:8786'"),
    },
    "output": {
        "units": ("metric", "'metric' (m, km/h) or 'us' (ft, mph): speeds are read and every result written in these "
                            "units; 'us' also judges with aashto-2018-us unless criteria.set says otherwise"),
        "us_foot": ("ft", "foot of US customary output: 'ft' (international) or 'us_ft' (US survey)"),
        "report_curves": (50, "deficient curves given a page of their own in report.html (in rank order)"),
        "profiles_pdf": (False, "also write profiles.pdf, one long profile per road for the field team"),
    },
    "criteria": {
        "set": ("aashto-2018-metric", "criteria set to judge against (sightaudit criteria lists them)"),
        "grade_adjusted": (False, "required SSD on the grade of each station rather than level (as the K tables assume)"),
        "files": ([], "CSV files adding criteria sets of your own (sightaudit criteria --template)"),
    },
    "speed": {
        "source": ("attribute", "'attribute': judge at the roads' speed column; 'predicted': at the 85th-percentile "
                                "speed predicted by FHWA-RD-99-171"),
        "margin_kmh": (0.0, "added to every road's attribute speed before judging (e.g. 10 for posted + 10 km/h)"),
        "default_by_class": ({}, "speed (km/h) for roads of a class with no speed, e.g. { local = 60 }"),
        "predict_missing": (True, "roads with no usable speed (and no class default) are judged at predicted speeds"),
        "desired_kmh": (98.0, "drivers' desired speed on long tangents, the ceiling of predicted speeds (km/h)"),
    },
    "plan": {
        "smooth_m": (50.0, "length over which the centreline's heading is smoothed against digitising noise (m)"),
        "max_radius_m": (3000.0, "bends flatter than this radius are treated as tangent (m)"),
        "min_length_m": (20.0, "shortest horizontal curve kept (m)"),
        "min_deflection_deg": (3.0, "smallest turn kept as a horizontal curve (degrees)"),
        "e_max_pct": (8.0, "maximum superelevation for the minimum-radius check (4, 6 or 8 %)"),
        "lane_width_m": (3.6, "lane width: the sight line offset is measured from the inside lane's centre (m)"),
    },
    "junctions": {
        "file": ("", "junctions and accesses (points, CSV or GPKG) checked for in the zones hidden by crests"),
        "layer": ("", "GeoPackage layer of the junctions; empty = the only layer"),
        "max_offset_m": (30.0, "a junction further than this from a road's centreline is not on that road (m)"),
        "from_network": (True, "also take a junction wherever one road's end lies on another road"),
        "snap_m": (5.0, "how close a road's end must come to another road to make a junction (m)"),
    },
    "sight": {
        "fine_step_m": (2.0, "spacing of the road samples a sight line is checked against (m)"),
        "ground_diagnostic": (True, "also measure the line of sight on the raw ground profile, at the station "
                                    "step (diagnostic columns)"),
    },
    "confidence": {
        "p_verdict": (0.9, "a curve is judged deficient only where the probability that its sight distance is "
                           "short of the requirement is at least this"),
        "p_adequate": (0.05, "a curve is judged adequate only where that probability is at most this (smaller than "
                             "1 - p_verdict: a wrong 'adequate' is the costlier error); between the two, undetermined"),
        "p_high": (0.99, "a verdict is of high confidence only where that probability is at least this "
                         "(or at most 1 minus it), the fit is clean and the grade change clear"),
        "min_significance": (3.0, "a grade change smaller than this many standard deviations is never judged deficient"),
        "high_significance": (5.0, "a grade change must be this many standard deviations for high confidence"),
        "max_cell_for_verdict_m": (20.0, "on a DEM with cells coarser than this no curve is judged: every verdict "
                                         "is undetermined and the report says why (m)"),
        "fine_resolution_m": (4.0, "ground data resolving features this short (m) count as survey-grade in the "
                                   "advice given with undetermined verdicts"),
    },
    "checks": {
        "override": ([], "checks on the inputs to override, each reported in run.json and the report: "
                         "'speed_unit', 'elevation_unit', 'coverage', 'grades'"),
        "min_coverage_pct": (50.0, "a run stops when the ground data cover less of the road length than this (%)"),
        "max_steep_pct": (25.0, "a run stops when more of the road length than this is steeper than "
                                "artefacts.max_road_grade_pct: usually a wrong elevation unit (%)"),
    },
    "inventory": {
        "severity_bands_kmh": ([10.0, 20.0], "speed gaps (km/h) separating minor, moderate and severe deficiencies"),
        "priority_weights": ({"shortfall": 1.0, "speed": 1.0, "exposure": 1.0},
                             "weights of shortfall, speed gap and traffic exposure in the priority score"),
        "aadt_ref": (20000.0, "AADT at which the exposure factor of the priority score reaches its maximum"),
        "hazard_weight": (1.0, "points (x 100) added to the score of a stretch whose crest hides a hazard"),
        "reconstruction_gap_kmh": (32.0, "speed gap above which reconstruction is hinted (TRB SR 214: 20 mph; from memory)"),
        "reconstruction_aadt": (1500.0, "AADT above which reconstruction is hinted (TRB SR 214; from memory)"),
    },
}


def _nearest_key(name: str, section: str | None = None) -> str:
    if section is None:
        choices = list(SPEC)
    else:
        choices = [f"{section}.{k}" for k in SPEC[section]]
        name = f"{section}.{name}"
    everything = [f"{s}.{k}" for s in SPEC for k in SPEC[s]] + list(SPEC)
    best = difflib.get_close_matches(name, choices, n=1, cutoff=0.0) or difflib.get_close_matches(
        name, everything, n=1, cutoff=0.0
    )
    return best[0] if best else "?"


def _coerce(key: str, value: Any, default: Any, source: str) -> Any:
    """Check a value against the type of its default."""
    if isinstance(default, bool):
        if isinstance(value, bool):
            return value
    elif isinstance(default, float):
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
    elif isinstance(default, int):
        if isinstance(value, int) and not isinstance(value, bool):
            return value
    elif isinstance(default, str):
        if isinstance(value, str):
            return value
    elif isinstance(default, list):
        if isinstance(value, list):
            return list(value)
    elif isinstance(default, dict):
        if isinstance(value, dict):
            return dict(value)
    raise InputError(
        f"{source}: {key} = {value!r} should be {type(default).__name__} "
        f"(like {default!r}); fix the value"
    )


def _check_value(key: str, value: Any, source: str) -> None:
    """Checks beyond the type, for settings with structure."""
    def bad(msg):
        raise InputError(f"{source}: {key} {msg}")

    if key == "inventory.severity_bands_kmh":
        if len(value) != 2 or not all(isinstance(v, (int, float)) for v in value) or not 0 <= value[0] <= value[1]:
            bad("must be two speeds in km/h, smaller first, e.g. [10, 20]")
    elif key == "inventory.priority_weights":
        extra = set(value) - {"shortfall", "speed", "exposure"}
        if extra:
            bad(f"has unknown weight(s) {', '.join(sorted(extra))}; use shortfall, speed, exposure")
        if not all(isinstance(v, (int, float)) and v >= 0 for v in value.values()) or sum(value.values()) <= 0:
            bad("weights must be numbers >= 0, not all zero")
    elif key == "speed.default_by_class":
        if not all(isinstance(v, (int, float)) and v > 0 for v in value.values()):
            bad("speeds must be positive numbers, e.g. { local = 60, collector = 80 }")
    elif key == "criteria.files":
        if not all(isinstance(v, str) for v in value):
            bad("must be a list of file paths")
    elif key in ("profile.step_m", "sight.fine_step_m", "ground.max_offset_m", "profile.max_gap_m",
                 "inventory.aadt_ref", "speed.desired_kmh", "plan.smooth_m", "plan.max_radius_m") and not value > 0:
        bad("must be positive")
    elif key == "run.engine" and value not in ("local", "dask"):
        bad("must be 'local' or 'dask'")
    elif key == "run.workers" and value < 0:
        bad("must be 0 (every core) or more")
    elif key == "run.chunk_km" and not value > 0:
        bad("must be positive")
    elif key == "output.units" and value not in ("metric", "us"):
        bad("must be 'metric' or 'us'")
    elif key == "output.us_foot" and value not in ("ft", "us_ft"):
        bad("must be 'ft' (international foot) or 'us_ft' (US survey foot)")
    elif key == "output.report_curves" and value < 0:
        bad("must not be negative")
    elif key == "ground.elevation_unit" and value not in ("m", "ft", "us_ft"):
        bad("must be 'm', 'ft' (international foot) or 'us_ft' (US survey foot)")
    elif key == "roads.speed_unit" and value not in ("", "kmh", "mph"):
        bad("must be 'kmh' or 'mph' (or empty: that of output.units)")
    elif key == "checks.override":
        unknown = [v for v in value if v not in CHECKS]
        if unknown:
            bad(f"has unknown check(s) {', '.join(map(str, unknown))}; use {', '.join(CHECKS)}")
    elif key in ("checks.min_coverage_pct", "checks.max_steep_pct") and not 0 <= value <= 100:
        bad("must be between 0 and 100 (%)")
    elif key == "speed.source" and value not in ("attribute", "predicted"):
        bad("must be 'attribute' or 'predicted'")
    elif key == "plan.e_max_pct" and not 0 <= value <= 20:
        bad("must be between 0 and 20 (%)")


class Config:
    """Settings as used by one run. ``cfg["profile.step_m"]`` reads a value."""

    def __init__(self, values: dict[str, dict[str, Any]] | None = None, source: str = "defaults"):
        self._values = {s: {k: v[0] for k, v in keys.items()} for s, keys in SPEC.items()}
        self.source = source
        self.explicit: set[str] = set()  # keys set by a file or a flag, not left at their default
        if values:
            self.update(values, source)

    def update(self, values: dict[str, Any], source: str) -> None:
        for section, keys in values.items():
            if section not in SPEC:
                raise InputError(
                    f"{source}: unknown section [{section}]; did you mean [{_nearest_key(section)}]?"
                )
            if not isinstance(keys, dict):
                raise InputError(f"{source}: [{section}] must be a table of keys")
            for key, value in keys.items():
                if key not in SPEC[section]:
                    raise InputError(
                        f"{source}: unknown key {section}.{key}; did you mean {_nearest_key(key, section)}?"
                    )
                default = SPEC[section][key][0]
                value = _coerce(f"{section}.{key}", value, default, source)
                if isinstance(default, dict):
                    value = default | value if section == "inventory" else value
                _check_value(f"{section}.{key}", value, source)
                self._values[section][key] = value
                self.explicit.add(f"{section}.{key}")

    def set(self, dotted: str, value: Any, source: str = "command line") -> None:
        section, _, key = dotted.partition(".")
        self.update({section: {key: value}}, source)

    def __getitem__(self, dotted: str) -> Any:
        section, _, key = dotted.partition(".")
        try:
            return self._values[section][key]
        except KeyError:
            raise KeyError(f"no setting {dotted!r}") from None

    def as_dict(self) -> dict[str, dict[str, Any]]:
        return {s: dict(k) for s, k in self._values.items()}

    def copy_with(self, values: dict[str, Any]) -> "Config":
        """A copy with some settings changed (``{"section.key": value}``)."""
        other = copy.deepcopy(self)
        for dotted, value in values.items():
            other.set(dotted, value, "internal")
        return other

    def apply_unit_defaults(self) -> None:
        """With US customary units, settings left at their default follow: the criteria set
        becomes aashto-2018-us, the speed column speed_mph, and ground elevations feet."""
        if self["output.units"] != "us":
            return
        for key, value in (("criteria.set", "aashto-2018-us"), ("roads.speed_column", "speed_mph"),
                           ("ground.elevation_unit", "ft")):
            if key not in self.explicit:
                section, _, name = key.partition(".")
                self._values[section][name] = value


def load_config(path: str | Path | None = None, overrides: dict[str, Any] | None = None) -> Config:
    """Defaults, then the TOML file (if any), then ``overrides`` (``{"section.key": value}``)."""
    cfg = Config()
    if path:
        p = Path(path)
        if not p.is_file():
            raise InputError(f"{p}: config file not found; check the path given to --config")
        try:
            data = tomllib.loads(p.read_text(encoding="utf-8"))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise InputError(f"{p}: not a valid TOML file ({exc}); fix the syntax") from None
        cfg.update(data, str(p))
        cfg.source = str(p)
    for dotted, value in (overrides or {}).items():
        if value is not None:
            cfg.set(dotted, value)
    cfg.apply_unit_defaults()
    return cfg


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(x)}" for k, x in v.items()) + " }" if v else "{}"
    raise TypeError(type(v))


def example_toml() -> str:
    """A commented config file holding every setting at its default (``sightaudit init``)."""
    lines = ["# sightaudit settings. Every setting is listed, commented out, at its default:",
             "# remove the leading '# ' of the ones you change. Lengths in metres and speeds in km/h",
             "# unless the key's name says otherwise. With output.units = \"us\", the criteria set, the",
             "# speed column and the elevation unit follow (aashto-2018-us, speed_mph, ft) unless set here.",
             "# Use with: sightaudit run --roads ROADS --ground GROUND --config this-file.toml --out DIR", ""]
    for section, keys in SPEC.items():
        lines.append(f"[{section}]")
        for key, (default, text) in keys.items():
            lines.append(f"## {text}")
            lines.append(f"# {key} = {_toml_value(default)}")
        lines.append("")
    return "\n".join(lines)


# ------------------------------------------------------------------ typed settings
def section_defaults(section: str) -> dict[str, Any]:
    """The default of every key of ``section``, from :data:`SPEC` (the one place defaults live)."""
    return {k: copy.deepcopy(v[0]) for k, v in SPEC[section].items()}


def _section_type(section: str) -> type:
    """A frozen dataclass with one typed field per key of ``section``, defaults from SPEC and the
    description in each field's ``metadata['help']``."""
    fields = []
    for key, (default, desc) in SPEC[section].items():
        if isinstance(default, (list, dict)):
            f = field(default_factory=lambda d=default: copy.deepcopy(d), metadata={"help": desc})
        else:
            f = field(default=default, metadata={"help": desc})
        fields.append((key, type(default), f))
    return make_dataclass(section.capitalize() + "Settings", fields, frozen=True)


SECTION_TYPES: dict[str, type] = {s: _section_type(s) for s in SPEC}


def _settings_to_config(self) -> Config:
    """The run settings these typed settings stand for (every value marked as set where it
    differs from its default)."""
    cfg = Config()
    values = {s: {k: v for k, v in asdict(getattr(self, s)).items() if v != SPEC[s][k][0]} for s in SPEC}
    cfg.update({s: kv for s, kv in values.items() if kv}, "settings")
    cfg.apply_unit_defaults()
    return cfg


def _settings_from_config(cls, cfg: Config) -> "Settings":
    """Typed settings holding the values of a run's :class:`Config`."""
    d = cfg.as_dict()
    return cls(**{s: SECTION_TYPES[s](**d[s]) for s in SPEC})


def _settings_load(cls, path: str | Path | None = None, **overrides: Any) -> "Settings":
    """Defaults, then a TOML file, then ``overrides`` given as ``section__key=value``."""
    dotted = {k.replace("__", "."): v for k, v in overrides.items()}
    return cls.from_config(load_config(path, dotted))


def _settings_replace(self, **changes: Any) -> "Settings":
    """A copy with some values changed, given as ``section__key=value``; checked like a file."""
    cfg = self.to_config()
    for k, v in changes.items():
        cfg.set(k.replace("__", "."), v, "settings")
    return type(self).from_config(cfg)


Settings = make_dataclass(
    "Settings",
    [(s, t, field(default_factory=t)) for s, t in SECTION_TYPES.items()],
    frozen=True,
    namespace={"to_config": _settings_to_config, "from_config": classmethod(_settings_from_config),
               "load": classmethod(_settings_load), "replace": _settings_replace,
               "__doc__": "Every setting of an audit, typed and grouped by section (``Settings().alignment."
                          "min_tangent_m``); the defaults and descriptions are those of :data:`SPEC`. "
                          "``Settings.load(path, section__key=value)`` reads a TOML file and overrides; "
                          "``settings.replace(section__key=value)`` changes values, checked as in a file."},
)
Settings.__module__ = __name__
