"""A study's layout: which cell, condition and group each recording file belongs to.

A study is many cells, each recorded under several conditions (baseline, a drug, washout), the
cells perhaps in groups (the drug given, a genotype). Upstroke learns the layout either from the
files' paths, by a pattern the user writes, or from a small CSV sheet the user keeps.

Pattern
    A path relative to the study's folder, with ``/`` between folders, in which ``{name}`` takes
    any text within one folder or file name, ``{name:REGEX}`` takes text matching a regular
    expression, ``*`` any text within a name and ``**/`` any number of folders. ``{cell}`` and
    ``{condition}`` are required; every other ``{name}`` (``{group}``, ``{drug}``, ``{date}``)
    becomes a column of its own. Example: ``{cell}/{condition}.abf`` or, for folders named
    ``<cell>_<drug>``, ``{cell}_{drug:[a-z]+}/{condition}_spont.csv``.
Sheet
    A CSV file with a header; the columns ``file``, ``cell`` and ``condition`` are required,
    ``group`` is optional, and any other column (drug, concentration, date) is carried into
    every output table. ``file`` is relative to the sheet's folder unless absolute.

Conditions are ordered as the user says (the first is the baseline of every comparison);
without an order they keep the order in which they first appear. Files that match nothing are
listed in :attr:`StudyLayout.unmatched`, never guessed.
"""

from __future__ import annotations

import csv
import os
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace

from analysis.errors import InputError
from analysis.readers import supported_extensions

__all__ = ["REQUIRED_COLUMNS", "StudyEntry", "StudyError", "StudyLayout"]

#: The sheet's required columns; ``group`` is optional.
REQUIRED_COLUMNS = ("file", "cell", "condition")
_RESERVED = ("file", "cell", "condition", "group")
_FIELD = re.compile(r"\{(?P<name>[A-Za-z_][A-Za-z0-9_]*)(?::(?P<regex>[^{}]*(?:\{[^{}]*\}[^{}]*)*))?\}")


class StudyError(InputError):
    """A study's pattern or sheet is malformed, or assigns no file."""


@dataclass(frozen=True)
class StudyEntry:
    """One recording file of a study.

    Attributes
    ----------
    file : str
        The path relative to the study's folder (``/`` separators), or absolute when the file
        lies outside it.
    cell, condition : str
        The cell it was recorded from and the condition it was recorded under.
    group : str
        The cell's group (empty when the study has none).
    extra : tuple of (str, str)
        The sheet's or pattern's own columns, in their order.
    """

    file: str
    cell: str
    condition: str
    group: str = ""
    extra: tuple[tuple[str, str], ...] = ()

    def value(self, column: str) -> str:
        """The entry's value in any column (``file``, ``cell``, ... or an extra column)."""
        if column in _RESERVED:
            return getattr(self, column)
        return dict(self.extra).get(column, "")


@dataclass(frozen=True)
class StudyLayout:
    """Which cell, condition and group each file of a study belongs to.

    Attributes
    ----------
    root : str
        The study's folder (absolute); entries' relative paths start there.
    entries : tuple of StudyEntry
        One per file: in path order from a pattern, in the sheet's order from a sheet.
    conditions : tuple of str
        Every condition in order; the first is the baseline.
    extra_columns : tuple of str
        The user's own columns, in order.
    group_column : str
        The column the group was taken from (``"group"`` when given as such; empty when none).
    source : str
        How the layout was made: ``"pattern: ..."`` or ``"sheet: ..."``.
    unmatched : tuple of str
        Recording files under ``root`` that the pattern or sheet does not assign (relative
        paths); reported, never analysed.
    """

    root: str
    entries: tuple[StudyEntry, ...]
    conditions: tuple[str, ...]
    extra_columns: tuple[str, ...] = ()
    group_column: str = ""
    source: str = ""
    unmatched: tuple[str, ...] = field(default=())

    # -- making one --------------------------------------------------------------------------
    @classmethod
    def from_pattern(
        cls,
        root: str | os.PathLike,
        pattern: str,
        *,
        condition_order: Sequence[str] | None = None,
        group_from: str | None = None,
        files: Iterable[str | os.PathLike] | None = None,
    ) -> StudyLayout:
        """The layout that a path pattern gives to the recordings under ``root``.

        Parameters
        ----------
        root : str or path
            The study's folder.
        pattern : str
            See the module docstring, e.g. ``"{cell}/{condition}.abf"``.
        condition_order : sequence of str or None
            The conditions in order, baseline first; None keeps the order of first appearance
            (files in path order; a sheet's rows in order).
        group_from : str or None
            The pattern field that names the group; None uses ``{group}`` when the pattern has
            one, else no groups.
        files : iterable of path or None
            The candidate files; None takes every recording file under ``root``.

        Raises
        ------
        StudyError
            When the pattern lacks ``{cell}`` or ``{condition}``, is not a valid expression,
            matches no file, or when ``group_from`` or ``condition_order`` name something the
            files do not have.
        """
        top = os.path.abspath(os.fspath(root))
        regex, names = _compile_pattern(pattern)
        candidates = _walk(top) if files is None else [os.path.abspath(os.fspath(f)) for f in files]
        group_column = _group_column(group_from, names, f"pattern {pattern!r}")
        extras = tuple(n for n in names if n not in _RESERVED)
        entries, unmatched = [], []
        for path in candidates:
            rel = _relative(path, top)
            match = regex.fullmatch(rel)
            if match is None:
                unmatched.append(rel)
                continue
            values = match.groupdict()
            entries.append(StudyEntry(
                rel, values["cell"], values["condition"],
                values.get(group_column, "") if group_column else "",
                tuple((n, values[n]) for n in extras),
            ))
        if not entries:
            raise StudyError(
                top, f"no file matches the pattern {pattern!r} ({len(candidates)} file(s) looked at)",
                "write the pattern relative to this folder, e.g. '{cell}/{condition}.abf'",
            )
        return cls._build(top, entries, condition_order, extras, group_column, f"pattern: {pattern}", unmatched)

    @classmethod
    def from_sheet(
        cls,
        csv_path: str | os.PathLike,
        *,
        root: str | os.PathLike | None = None,
        condition_order: Sequence[str] | None = None,
        group_from: str | None = None,
        files: Iterable[str | os.PathLike] | None = None,
    ) -> StudyLayout:
        """The layout a CSV sheet gives (columns ``file``, ``cell``, ``condition``, ...).

        Parameters
        ----------
        csv_path : str or path
            The sheet: a header row, then one row per file.
        root : str or path or None
            The folder the sheet's relative ``file`` paths start from; None is the sheet's own
            folder.
        condition_order, group_from
            As in :meth:`from_pattern`; ``group_from`` names a sheet column.
        files : iterable of path or None
            Recording files found for the batch: those the sheet does not name are listed in
            ``unmatched``.

        Raises
        ------
        StudyError
            For a missing or unreadable sheet, a missing required column, an empty cell in a
            required column, a file named twice, a file that does not exist, or an unknown
            ``group_from`` column or condition.
        """
        sheet = os.fspath(csv_path)
        rows, header = _read_sheet(sheet)
        top = os.path.abspath(os.fspath(root) if root is not None else os.path.dirname(os.path.abspath(sheet)))
        group_column = _group_column(group_from, header, f"sheet {os.path.basename(sheet)}")
        extras = tuple(c for c in header if c not in _RESERVED)
        entries, seen, missing = [], {}, []
        for line_no, row in rows:
            given = row["file"]
            path = given if os.path.isabs(given) else os.path.join(top, given)
            rel = _relative(os.path.abspath(path), top)
            if rel in seen:
                raise StudyError(sheet, f"line {line_no} names {given!r} again (first on line {seen[rel]})",
                                 "list every file once")
            seen[rel] = line_no
            if not os.path.isfile(path):
                missing.append(given)
            group = row.get(group_column, "") if group_column else ""
            entries.append(StudyEntry(rel, row["cell"], row["condition"], group,
                                      tuple((c, row.get(c, "")) for c in extras)))
        if missing:
            shown = ", ".join(repr(m) for m in missing[:3]) + (f" and {len(missing) - 3} more" if len(missing) > 3 else "")
            raise StudyError(sheet, f"{len(missing)} file(s) in the sheet do not exist under {top}: {shown}",
                             "correct the 'file' column (relative to the sheet's folder) or remove those rows")
        unmatched = []
        if files is not None:
            itself = _relative(os.path.abspath(sheet), top)  # the sheet may sit among the recordings
            unmatched = [r for r in (_relative(os.path.abspath(os.fspath(f)), top) for f in files)
                         if r not in seen and r != itself]
        return cls._build(top, entries, condition_order, extras, group_column, f"sheet: {sheet}", unmatched)

    @classmethod
    def _build(cls, top, entries, order, extras, group_column, source, unmatched) -> StudyLayout:
        present = list(dict.fromkeys(e.condition for e in entries))
        if order:
            order = [c.strip() for c in order if c.strip()]
            unknown = [c for c in order if c not in present]
            if unknown:
                raise StudyError(
                    None, f"the condition order names {', '.join(map(repr, unknown))}, which no file has "
                    f"(the files have {', '.join(map(repr, present))})", "spell the conditions as the files do",
                )
            missing = [c for c in present if c not in order]
            if missing:
                raise StudyError(
                    None, f"the condition order leaves out {', '.join(map(repr, missing))}",
                    "list every condition, baseline first",
                )
            conditions = tuple(order)
        else:
            conditions = tuple(present)
        return cls(top, tuple(entries), conditions, tuple(extras), group_column or "", source, tuple(unmatched))

    # -- reading one ---------------------------------------------------------------------------
    @property
    def baseline(self) -> str:
        """The first condition: what every other condition is compared with."""
        return self.conditions[0]

    @property
    def cells(self) -> tuple[str, ...]:
        """The cells, in order of first appearance."""
        return tuple(dict.fromkeys(e.cell for e in self.entries))

    @property
    def groups(self) -> tuple[str, ...]:
        """The groups, in order of first appearance (``("",)`` when the study has none)."""
        return tuple(dict.fromkeys(e.group for e in self.entries))

    def path_of(self, entry: StudyEntry) -> str:
        """The absolute path of an entry's file."""
        return os.path.normpath(os.path.join(self.root, entry.file))

    def paths(self) -> list[str]:
        """Every entry's absolute path, in entry order."""
        return [self.path_of(e) for e in self.entries]

    def entry_for(self, path: str | os.PathLike) -> StudyEntry | None:
        """The entry of a file (by its absolute path), or None when the study has none."""
        key = _key(os.path.abspath(os.fspath(path)))
        for entry in self.entries:
            if _key(self.path_of(entry)) == key:
                return entry
        return None

    def entries_of(self, cell: str, condition: str) -> list[StudyEntry]:
        """The files of one cell under one condition (usually one)."""
        return [e for e in self.entries if e.cell == cell and e.condition == condition]

    def with_root(self, root: str | os.PathLike) -> StudyLayout:
        """The same layout with its folder moved (for a study copied elsewhere)."""
        return replace(self, root=os.path.abspath(os.fspath(root)))

    def describe(self) -> str:
        """One line: files, cells, conditions in order, groups."""
        groups = [g for g in self.groups if g]
        text = (f"{len(self.entries)} file(s), {len(self.cells)} cell(s), conditions "
                f"{' > '.join(self.conditions)} (baseline {self.baseline})")
        if groups:
            text += f", {len(groups)} group(s) by {self.group_column}: {', '.join(groups)}"
        return text


# -- helpers ------------------------------------------------------------------------------------
def _key(path: str) -> str:
    return os.path.normcase(os.path.normpath(path))


def _relative(path: str, top: str) -> str:
    rel = os.path.relpath(path, top)
    if rel.startswith(os.pardir):
        return path.replace(os.sep, "/")
    return rel.replace(os.sep, "/")


def _walk(top: str) -> list[str]:
    if not os.path.isdir(top):
        raise StudyError(top, "is not a folder", "give the study's folder")
    extensions = tuple(e.lower() for e in supported_extensions())
    found = []
    for folder, dirs, names in os.walk(top):
        dirs[:] = sorted(d for d in dirs if not d.startswith("."))
        found += [os.path.join(folder, n) for n in sorted(names)
                  if not n.startswith(".") and os.path.splitext(n)[1].lower() in extensions]
    return sorted(found)


def _compile_pattern(pattern: str) -> tuple[re.Pattern, list[str]]:
    text = pattern.strip().replace("\\", "/").lstrip("/")
    out, names, at = [], [], 0
    for m in _FIELD.finditer(text):
        out.append(_glob_part(text[at:m.start()]))
        name = m.group("name")
        if name in names:
            raise StudyError(None, f"the pattern {pattern!r} names {{{name}}} twice", "name each field once")
        names.append(name)
        out.append(f"(?P<{name}>{m.group('regex') or '[^/]+?'})")
        at = m.end()
    out.append(_glob_part(text[at:]))
    lacking = [f"{{{n}}}" for n in ("cell", "condition") if n not in names]
    if lacking:
        raise StudyError(None, f"the pattern {pattern!r} has no {' or '.join(lacking)}",
                         "write e.g. '{cell}/{condition}.abf' (see docs/study.md)")
    try:
        return re.compile("".join(out)), names
    except re.error as exc:
        raise StudyError(None, f"the pattern {pattern!r} is not valid ({exc})",
                         "check the expressions inside {name:...}") from None


def _glob_part(text: str) -> str:
    parts = []
    i = 0
    while i < len(text):
        if text.startswith("**/", i):
            parts.append("(?:[^/]+/)*")
            i += 3
        elif text[i] == "*":
            parts.append("[^/]*")
            i += 1
        elif text[i] == "?":
            parts.append("[^/]")
            i += 1
        else:
            parts.append(re.escape(text[i]))
            i += 1
    return "".join(parts)


def _group_column(group_from: str | None, names: Sequence[str], what: str) -> str:
    if group_from:
        if group_from not in names:
            raise StudyError(None, f"--group-from {group_from!r}: the {what} has no such column",
                             f"choose one of {', '.join(n for n in names if n not in ('file',))}")
        return group_from
    return "group" if "group" in names else ""


def _read_sheet(sheet: str) -> tuple[list[tuple[int, Mapping[str, str]]], list[str]]:
    if not os.path.isfile(sheet):
        raise StudyError(sheet, "no such sheet", "check the path of the study sheet (a CSV file)")
    try:
        with open(sheet, encoding="utf-8-sig", newline="") as fh:
            text = fh.read()
    except (OSError, UnicodeDecodeError) as exc:
        raise StudyError(sheet, f"cannot be read ({exc})", "save the sheet as UTF-8 CSV") from None
    try:
        dialect = csv.Sniffer().sniff(text.split("\n", 1)[0], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader(text.splitlines(), dialect)
    header = [h.strip() for h in next(reader, [])]
    lacking = [c for c in REQUIRED_COLUMNS if c not in header]
    if lacking:
        raise StudyError(sheet, f"has no column {', '.join(map(repr, lacking))} (its header: {', '.join(header) or 'empty'})",
                         "give a header row with file, cell, condition (and optionally group and your own columns)")
    if len(set(header)) != len(header):
        raise StudyError(sheet, "names a column twice in its header", "give every column a distinct name")
    rows = []
    for line_no, cells in enumerate(reader, start=2):
        if not any(c.strip() for c in cells):
            continue
        if len(cells) > len(header):
            raise StudyError(sheet, f"line {line_no} has {len(cells)} cells where the header names {len(header)}",
                             "fix that line")
        row = {h: (cells[i].strip() if i < len(cells) else "") for i, h in enumerate(header)}
        empty = [c for c in REQUIRED_COLUMNS if not row[c]]
        if empty:
            raise StudyError(sheet, f"line {line_no} has no {', '.join(empty)}", "fill in every file, cell and condition")
        rows.append((line_no, row))
    if not rows:
        raise StudyError(sheet, "lists no files", "add one row per recording file")
    return rows, header
