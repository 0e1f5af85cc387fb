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
import tomllib
from dataclasses import asdict, field, make_dataclass
from pathlib import Path
from typing import Any

from .errors import InputError
from .spec import SPEC
from .validate import check_value, coerce_value, nearest_key


class Config:
    """Settings as used by one run. ``cfg["profile.step_m"]`` reads a value.

    Parameters
    ----------
    values : dict, optional
        ``{section: {key: value}}`` to set over the defaults of :data:`SPEC`.
    source : str, default "defaults"
        Where the values come from (a file name), named in error messages.
    """

    def __init__(self, values: dict[str, dict[str, Any]] | None = None, source: str = "defaults"):
        self._values = {s: {k: v[0] for k, v in keys.items()} for s, keys in SPEC.items()}
        self.source = source
        self.explicit: set[str] = set()  # keys set by a file or a flag, not left at their default
        if values:
            self.update(values, source)

    def update(self, values: dict[str, Any], source: str) -> None:
        """Set several values, each checked against its default's type and range.

        Parameters
        ----------
        values : dict
            ``{section: {key: value}}``; table settings of ``[inventory]`` are merged into their
            default, others replaced.
        source : str
            Where the values come from (a file name, ``"command line"``), for error messages.

        Raises
        ------
        InputError
            On an unknown section or key (naming the nearest valid one) or a bad value.
        """
        for section, keys in values.items():
            if section not in SPEC:
                raise InputError(
                    f"{source}: unknown section [{section}]; did you mean [{nearest_key(section)}]?"
                )
            if not isinstance(keys, dict):
                raise InputError(f"{source}: [{section}] must be a table of keys")
            for key, value in keys.items():
                if key not in SPEC[section]:
                    raise InputError(
                        f"{source}: unknown key {section}.{key}; did you mean {nearest_key(key, section)}?"
                    )
                default = SPEC[section][key][0]
                value = coerce_value(f"{section}.{key}", value, default, source)
                if isinstance(default, dict):
                    value = default | value if section == "inventory" else value
                check_value(f"{section}.{key}", value, source)
                self._values[section][key] = value
                self.explicit.add(f"{section}.{key}")

    def set(self, dotted: str, value: Any, source: str = "command line") -> None:
        """Set one value, checked as in a file.

        Parameters
        ----------
        dotted : str
            ``"section.key"``.
        value : object
            The new value, in the setting's unit (m, km/h, % ... as its description says).
        source : str, default "command line"
            Where the value comes from, for error messages.
        """
        section, _, key = dotted.partition(".")
        self.update({section: {key: value}}, source)

    def __getitem__(self, dotted: str) -> Any:
        section, _, key = dotted.partition(".")
        try:
            return self._values[section][key]
        except KeyError:
            raise KeyError(f"no setting {dotted!r}") from None

    def as_dict(self) -> dict[str, dict[str, Any]]:
        """Every setting, as ``{section: {key: value}}``.

        Returns
        -------
        dict
            A copy of each section's table (the values themselves are not copied).
        """
        return {s: dict(k) for s, k in self._values.items()}

    def copy_with(self, values: dict[str, Any]) -> "Config":
        """A copy with some settings changed.

        Parameters
        ----------
        values : dict
            ``{"section.key": value}``, each checked as in a file.

        Returns
        -------
        Config
            A deep copy of this configuration with the values set.
        """
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
    """The settings of a run: defaults, then the TOML file (if any), then ``overrides``.

    Parameters
    ----------
    path : str or Path, optional
        A TOML config file; ``None`` for defaults only.
    overrides : dict, optional
        ``{"section.key": value}`` from the command line; ``None`` values are skipped.

    Returns
    -------
    Config
        The checked settings, with the unit-dependent defaults applied
        (:meth:`Config.apply_unit_defaults`).

    Raises
    ------
    InputError
        When the file is missing or not valid TOML, or a key or value is bad.
    """
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
    """A commented config file holding every setting at its default (``sightaudit init``).

    Returns
    -------
    str
        TOML text: every section of :data:`SPEC`, each key commented out at its default under
        its description.
    """
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
