"""The machinery of the settings sections: field declarations, metadata and value checks.

:func:`setting` declares a field with its unit, bounds or choices, one-line doc and published
source; :class:`Section` validates every field of a frozen section dataclass on construction;
:class:`FieldInfo` is what forms, tooltips and docs read. The sections themselves and
:class:`analysis.settings.Settings` live in :mod:`analysis.settings._settings`, which re-exports these names.
"""

import dataclasses
import math
import types
import typing
from dataclasses import dataclass, field, fields
from typing import Any, ClassVar, Mapping

from analysis.errors import SettingsError

__all__ = ["FieldInfo", "Section", "range_text", "setting", "section"]


def setting(
    default: Any,
    *,
    doc: str,
    unit: str = "",
    min: float | None = None,  # noqa: A002 - the metadata's own vocabulary
    max: float | None = None,  # noqa: A002
    choices: tuple | None = None,
    source: str = "",
) -> Any:
    """Declare one settings field with its metadata.

    Parameters
    ----------
    default
        The default value (MEASUREMENTS.md's default where it names one).
    doc : str
        One line for the settings form's tooltip and the docs.
    unit : str
        The value's unit ("" when it has none); also part of the field's name.
    min, max : float or None
        Inclusive bounds of a number (of each element of a tuple).
    choices : tuple or None
        The allowed values of a text (or optional number) field.
    source : str
        The published source of the definition, or "common practice, no source".
    """
    return field(default=default, metadata={
        "unit": unit, "min": min, "max": max, "choices": choices, "doc": doc, "source": source,
    })


def section(cls: type) -> Any:
    """Declare a section of :class:`Settings` (its defaults come from the section class)."""
    return field(default_factory=cls)


@dataclass(frozen=True)
class FieldInfo:
    """Everything a form, a tooltip or a reference table needs about one field."""

    path: str
    section: str
    name: str
    kind: str
    default: Any
    unit: str
    min: float | None
    max: float | None
    choices: tuple | None
    doc: str
    source: str


def _kind(annotation: Any) -> str:
    """``float``, ``int``, ``bool``, ``str``, ``optional float``, ``float list`` or ``text list``."""
    if annotation in (float, int, bool, str):
        return annotation.__name__
    origin = typing.get_origin(annotation)
    args = typing.get_args(annotation)
    if origin in (typing.Union, types.UnionType) and type(None) in args:
        inner = [a for a in args if a is not type(None)]
        if inner == [float]:
            return "optional float"
    if origin is tuple and args and args[0] is float:
        return "float list"
    if origin is tuple and args and args[0] is str:
        return "text list"
    raise TypeError(f"unsupported settings field type {annotation!r}")


def range_text(lo: float | None, hi: float | None, unit: str = "") -> str:
    """A setting's allowed range in words, as every message, tooltip and page shows it.

    Parameters
    ----------
    lo, hi : float or None
        The bounds (None: none on that side).
    unit : str
        Written after the numbers ("" where the unit stands elsewhere, as in a table's column).

    Returns
    -------
    str
        "" when neither bound is set.

    Examples
    --------
    >>> range_text(0.0, 1000.0, "ms"), range_text(1.0, None), range_text(None, None)
    ('from 0 to 1000 ms', 'at least 1', '')
    """
    unit = f" {unit}" if unit else ""
    if lo is not None and hi is not None:
        return f"from {lo:g} to {hi:g}{unit}"
    if lo is not None:
        return f"at least {lo:g}{unit}"
    if hi is not None:
        return f"at most {hi:g}{unit}"
    return ""


def _range_text(meta: Mapping[str, Any]) -> str:
    return range_text(meta["min"], meta["max"], meta["unit"]) or "any number"


def _check_value(path: str, kind: str, value: Any, meta: Mapping[str, Any], origin: str | None) -> Any:
    """The value converted to its field's type, or SettingsError naming the key and the range."""

    def wrong(what: str, fix: str) -> SettingsError:
        shown = repr(value)
        shown = shown if len(shown) <= 60 else shown[:57] + "..."  # a pasted paragraph, not a value
        return SettingsError(origin, f"setting {path} = {shown} {what}", fix)

    def number(x: Any, as_int: bool) -> float | int:
        if isinstance(x, bool) or not isinstance(x, (int, float)):
            raise wrong("is not a number", f"give {'a whole' if as_int else 'a'} number {_range_text(meta)}")
        if as_int:
            if isinstance(x, float) and not x.is_integer():
                raise wrong("is not a whole number", f"give a whole number {_range_text(meta)}")
            x = int(x)
        else:
            x = float(x)
            if not math.isfinite(x):
                raise wrong("is not a finite number", f"give a number {_range_text(meta)}")
        if (meta["min"] is not None and x < meta["min"]) or (meta["max"] is not None and x > meta["max"]):
            raise wrong("is out of range", f"allowed: {_range_text(meta)}")
        return x

    choices = meta["choices"]
    if kind == "bool":
        if not isinstance(value, bool):
            raise wrong("is not true or false", "write true or false")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise wrong("is not text", f"choose one of: {', '.join(map(str, choices or ()))}")
        if choices is not None and value not in choices:
            raise wrong("is not one of the choices", f"choose one of: {', '.join(choices)}")
        return value
    if kind in ("float", "int"):
        return number(value, kind == "int")
    if kind == "optional float":
        if value is None:
            return None
        x = number(value, False)
        if choices is not None and x not in choices:
            raise wrong("is not one of the choices", f"choose one of: {', '.join(f'{c:g}' for c in choices)} (or leave it out)")
        return x
    if kind == "float list":
        if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
            raise wrong("is not a list of numbers", f"give a list such as [20, 50, 90], each {_range_text(meta)}")
        if not value:
            raise wrong("is empty", "give at least one number")
        out = tuple(number(x, False) for x in value)
        if len(set(out)) != len(out):
            raise wrong("repeats a value", "give each value once")
        return out
    if kind == "text list":
        allowed = f"words from: {', '.join(choices)}" if choices else "words"
        if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
            raise wrong("is not a list of words", f"give a list such as [\"{(choices or ('word',))[0]}\"], {allowed}")
        unknown = [x for x in value if not isinstance(x, str) or (choices is not None and x not in choices)]
        if unknown:
            raise wrong(f"holds {unknown[0]!r}, which is not known", f"use {allowed}")
        if len(set(value)) != len(value):
            raise wrong("repeats a word", "give each word once")
        return tuple(value)
    raise TypeError(kind)


class Section:
    """Base of every settings section: validation of each field on construction.

    Subclasses are frozen dataclasses with a class attribute ``key`` (the section's name in
    files and paths such as ``"measurement.top_method"``).
    """

    key: ClassVar[str] = ""
    #: Fields that must keep an order, as ``(smaller, "<" or "<=", larger)``: each is in its own
    #: range, but together they would contradict each other.
    order: ClassVar[tuple[tuple[str, str, str], ...]] = ()

    def __post_init__(self) -> None:
        self._validate(None)

    def _validate(self, origin: str | None) -> None:
        hints = typing.get_type_hints(type(self))
        for f in fields(self):  # type: ignore[arg-type]
            kind = _kind(hints[f.name])
            value = _check_value(f"{self.key}.{f.name}", kind, getattr(self, f.name), f.metadata, origin)
            object.__setattr__(self, f.name, value)
        for low, op, high in self.order:
            a, b = getattr(self, low), getattr(self, high)
            if not (a < b if op == "<" else a <= b):
                raise SettingsError(
                    origin, f"setting {self.key}.{low} = {a:g} is not {'below' if op == '<' else 'at most'} "
                    f"{self.key}.{high} = {b:g}", f"make {low} smaller than {high}",
                )

    @classmethod
    def field_infos(cls) -> list[FieldInfo]:
        hints = typing.get_type_hints(cls)
        out = []
        for f in fields(cls):  # type: ignore[arg-type]
            m = f.metadata
            default = f.default if f.default is not dataclasses.MISSING else f.default_factory()  # type: ignore[misc]
            out.append(FieldInfo(
                path=f"{cls.key}.{f.name}", section=cls.key, name=f.name, kind=_kind(hints[f.name]),
                default=default, unit=m["unit"], min=m["min"], max=m["max"], choices=m["choices"],
                doc=m["doc"], source=m["source"],
            ))
        return out
