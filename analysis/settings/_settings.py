"""Analysis settings: frozen dataclasses with units, bounds, choices, docs and sources.

The settings are one :class:`Settings` made of sections (``preprocess``, ``detection``,
``measurement``, ...). Every field is declared with :func:`setting`, which records its unit, its
allowed range or choices, a one-line description and the published source of the definition it
selects. That metadata drives the bounds checks here, the TOML file, the results file (through
:meth:`Settings.to_dict`) and the settings form of the desktop app (:func:`describe`).

Adding a section
----------------
1. Write a frozen dataclass that derives from :class:`Section`, with a class attribute
   ``key = "quality"`` (its name in files) and one :func:`setting` per field::

       @dataclass(frozen=True)
       class QualitySettings(Section):
           key: ClassVar[str] = "quality"
           apa_min_mV: float = setting(40.0, unit="mV", min=0.0, max=200.0,
                                       doc="smallest acceptable amplitude", source="from memory")

2. Add one line to :class:`Settings`: ``quality: QualitySettings = section(QualitySettings)``.

Nothing else changes: validation, ``to_dict``/``from_dict``, TOML, the hash and the GUI form all
walk the sections of :class:`Settings`. Adding a section with defaults changes the short hash of
every settings object; raise :data:`SCHEMA_VERSION` when a field changes meaning or is removed.

The declaration machinery (:func:`setting`, :class:`Section`, :class:`FieldInfo`) is in
:mod:`analysis.settings._fields`, the sections in :mod:`analysis.settings._sections` and the TOML
files in :mod:`analysis.settings._toml`; all are re-exported here, so
``from analysis.settings._settings import ...`` is all a caller needs.

Supported field types: ``float``, ``int``, ``bool``, ``str``, ``float | None`` (an optional
value; such fields must default to None, because TOML has no null: a missing key means None) and
``tuple[float, ...]``.
"""

import difflib
import hashlib
import json
import os
import typing
from dataclasses import dataclass, fields
from typing import Any, Mapping

from analysis.errors import SettingsError
from analysis.settings._fields import (  # noqa: F401
    FieldInfo,
    Section,
    _check_value,
    _kind,
    range_text,
    section,
    setting,
)

# The sections themselves (what each step reads) are in their own module.
from analysis.settings._sections import (
    DetectionSettings,
    MeasurementSettings,
    PreprocessSettings,
    QualitySettings,
    SummarySettings,
)

__all__ = ["SCHEMA_VERSION", "Settings", "describe"]

#: Version of the settings layout; stored with every result. Raise it when a field is renamed,
#: removed or changes meaning.
SCHEMA_VERSION = 1



@dataclass(frozen=True)
class Settings:
    """All analysis settings, one frozen section per step.

    Examples
    --------
    >>> s = Settings()
    >>> s.measurement.top_dvdt_V_per_s
    0.5
    >>> s2 = s.replace("measurement.top_method", "dvdt_fraction")
    >>> s2.measurement.top_method, s2.short_hash() != s.short_hash()
    ('dvdt_fraction', True)
    >>> Settings.from_dict(s2.to_dict()) == s2
    True
    """

    preprocess: PreprocessSettings = section(PreprocessSettings)
    detection: DetectionSettings = section(DetectionSettings)
    measurement: MeasurementSettings = section(MeasurementSettings)
    quality: QualitySettings = section(QualitySettings)
    summary: SummarySettings = section(SummarySettings)

    # -- structure ---------------------------------------------------------------------------
    @classmethod
    def sections(cls) -> dict[str, type]:
        """Section key -> section class, in order."""
        hints = typing.get_type_hints(cls)
        return {f.name: hints[f.name] for f in fields(cls)}

    # -- plain data ----------------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Plain JSON/TOML-compatible data: ``{"schema_version": N, section: {field: value}}``.

        Tuples become lists; optional values that are unset are None.
        """
        out: dict[str, Any] = {"schema_version": SCHEMA_VERSION}
        for key in self.sections():
            sec = getattr(self, key)
            out[key] = {
                f.name: list(v) if isinstance(v := getattr(sec, f.name), tuple) else v for f in fields(sec)
            }
        return out

    @classmethod
    def from_dict(cls, data: Mapping[str, Any], *, origin: str | os.PathLike | None = None) -> "Settings":
        """Settings from plain data; missing keys take their defaults.

        Raises
        ------
        SettingsError
            On an unknown section or key, a value of the wrong type, a value out of range or a
            schema version newer than this program's; the message names the key and what is
            allowed.
        """
        where = None if origin is None else os.fspath(origin)
        if not isinstance(data, Mapping):
            raise SettingsError(where, "the settings are not a table of sections", "see docs/settings for the layout")
        version = data.get("schema_version", SCHEMA_VERSION)
        if isinstance(version, bool) or not isinstance(version, int):
            raise SettingsError(where, f"schema_version = {version!r} is not a whole number", f"write schema_version = {SCHEMA_VERSION}")
        if version < 1:
            raise SettingsError(
                where, f"schema_version = {version} is not a settings version Upstroke ever wrote",
                f"write schema_version = {SCHEMA_VERSION} or leave it out",
            )
        if version > SCHEMA_VERSION:
            raise SettingsError(
                where, f"the settings have schema version {version}, newer than this Upstroke's {SCHEMA_VERSION}",
                "update Upstroke or save the settings again with this version",
            )
        sections = cls.sections()
        kwargs = {}
        for key, value in data.items():
            if key == "schema_version":
                continue
            if key not in sections:
                raise SettingsError(where, f"unknown settings section {key!r}", f"use one of: {', '.join(sections)}")
            if not isinstance(value, Mapping):
                raise SettingsError(where, f"settings section {key!r} is not a table", f"write it as [{key}]")
        for key, sec_cls in sections.items():
            given = dict(data.get(key, {}))
            names = [f.name for f in fields(sec_cls)]
            unknown = sorted(set(given) - set(names))
            if unknown:
                raise SettingsError(where, f"unknown setting {key}.{unknown[0]}", _name_hint(unknown[0], names, key))
            obj = object.__new__(sec_cls)
            defaults = sec_cls()
            for name in names:
                object.__setattr__(obj, name, given.get(name, getattr(defaults, name)))
            obj._validate(where)
            kwargs[key] = obj
        return cls(**kwargs)

    # -- edits -----------------------------------------------------------------------------------
    def replace(self, path: str, value: Any) -> "Settings":
        """A copy with one field changed, given as ``"section.field"``; validated."""
        return self.updated({path: value})

    def updated(self, changes: Mapping[str, Any]) -> "Settings":
        """A copy with several ``"section.field": value`` changes; validated."""
        data = self.to_dict()
        for path, value in changes.items():
            key, _, name = path.partition(".")
            if key not in data or key == "schema_version" or not name:
                raise SettingsError(None, f"unknown setting {path!r}", f"use section.field, sections: {', '.join(self.sections())}")
            if name not in data[key]:
                raise SettingsError(None, f"unknown setting {path!r}", _name_hint(name, list(data[key]), key))
            data[key][name] = list(value) if isinstance(value, tuple) else value
        return Settings.from_dict(data)

    def get(self, path: str) -> Any:
        """The value of ``"section.field"``."""
        key, _, name = path.partition(".")
        try:
            return getattr(getattr(self, key), name)
        except AttributeError:
            raise SettingsError(None, f"unknown setting {path!r}", "use section.field") from None

    # -- identity --------------------------------------------------------------------------------
    def to_json(self) -> str:
        """Canonical JSON text (sorted keys, no spaces): stored with results, hashed."""
        return json.dumps(self.to_dict(), sort_keys=True, separators=(",", ":"), allow_nan=False)

    def short_hash(self) -> str:
        """The first 10 hex digits of the SHA-256 of :meth:`to_json`: equal settings, equal hash."""
        return hashlib.sha256(self.to_json().encode("utf-8")).hexdigest()[:10]


def describe() -> list[FieldInfo]:
    """Metadata of every field of every section, in order (for forms, tooltips and docs)."""
    out: list[FieldInfo] = []
    for sec_cls in Settings.sections().values():
        out.extend(sec_cls.field_infos())
    return out


def _check_declarations() -> None:
    # TOML has no null, so an optional field written as "absent" must mean its default.
    for info in describe():
        if info.kind == "optional float" and info.default is not None:
            raise TypeError(f"{info.path}: an optional setting must default to None")


_check_declarations()


def _name_hint(name: str, names: list[str], section_name: str) -> str:
    """A short fix for a mistyped setting: the closest names, not all of them (keeps one line)."""

    close = difflib.get_close_matches(str(name), names, n=3, cutoff=0.5)
    if close:
        return f"did you mean {' or '.join(close)}? (docs/measurements.md lists every {section_name} setting)"
    return f"the {section_name} section has {len(names)} settings, listed in docs/measurements.md"

