"""Delimited text recordings: a time column and one or more signal columns, one sweep.

The first line that is not a ``#`` comment names the columns, with units: ``time_s``,
``t (ms)``, ``Vm (mV)``, ``V [V]``, ``Im/pA``; or a line of names followed by a line of units.
Cells are separated by tabs, commas, semicolons or runs of spaces (whichever the header uses).
The time column (the first in s, ms or us) gives the sampling rate and must be evenly spaced;
every other column is a channel in mV, V, uV (all shown as mV) or a current or current density
(pA, nA, pA/pF, A/F, ...), kept as given. A column whose units are unknown or missing is kept as
an auxiliary channel (shown with the units as written, never analysed) when another column is a
voltage. The whole file is parsed at open (text cannot be mapped), streamed from disk by numpy's
C parser so that only the numbers are held in memory.
"""

from __future__ import annotations

import os
import re
import warnings
from dataclasses import dataclass
from typing import Callable

import numpy as np

from analysis.errors import RecordingError
from analysis.recording import MIN_SAMPLES_PER_SWEEP, Recording
from analysis.readers._timebase import RELATIVE_TOLERANCE, rate_from_times

__all__ = ["EXTENSIONS", "SNIFF_BY_SIGNATURE", "read", "sniff", "parse_label"]

EXTENSIONS = (".csv", ".tsv", ".txt")
SNIFF_BY_SIGNATURE = False
#: Bytes read to find the header (comment lines, names, units).
HEAD_BYTES = 1 << 18

# Units recognised in a header, lower-cased -> (kind, units shown, factor to the shown units).
_UNITS: dict[str, tuple[str, str, float]] = {
    "s": ("time", "s", 1.0), "sec": ("time", "s", 1.0), "ms": ("time", "s", 1e-3),
    "msec": ("time", "s", 1e-3), "us": ("time", "s", 1e-6), "µs": ("time", "s", 1e-6),
    "v": ("voltage", "mV", 1e3), "mv": ("voltage", "mV", 1.0), "uv": ("voltage", "mV", 1e-3),
    "µv": ("voltage", "mV", 1e-3),
    "pa": ("current", "pA", 1.0), "na": ("current", "nA", 1.0), "ua": ("current", "uA", 1.0),
    "fa": ("current", "fA", 1.0), "a": ("current", "A", 1.0),
    # Current densities (current per membrane capacitance): auxiliary, never analysed.
    "pa/pf": ("current", "pA/pF", 1.0), "a/f": ("current", "A/F", 1.0),
}
_BRACKETED = re.compile(r"^(?P<name>.*?)\s*[\(\[]\s*(?P<unit>[^\)\]]*?)\s*[\)\]]\s*$")
_SUFFIXED = re.compile(r"^(?P<name>.+?)\s*[_/]\s*(?P<unit>[^_/\s]+)$")
# A header cell for whitespace-separated files: a word, optionally with "(unit)" after a space.
_WS_CELL = re.compile(r"\S+(?:\s+[\(\[][^\)\]\s]*[\)\]])?")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_FIX_CELLS = "cells must be plain numbers with a decimal point; fix or delete that line"


@dataclass(frozen=True)
class _Column:
    label: str
    name: str
    kind: str
    units: str
    factor: float


def sniff(head: bytes) -> bool:
    """True when the bytes look like text (no NUL bytes, mostly printable)."""
    if b"\x00" in head:
        return False
    sample = head.decode("utf-8", errors="replace")
    printable = sum(ch.isprintable() or ch in "\r\n\t" for ch in sample)
    return printable >= 0.98 * max(len(sample), 1)


def parse_label(label: str) -> tuple[str, str | None]:
    """A header cell's name and units, e.g. ``"t (ms)" -> ("t", "ms")``; units None if none.

    Examples
    --------
    >>> parse_label("Vm (mV)"), parse_label("time_s"), parse_label("V [V]"), parse_label("x")
    (('Vm', 'mV'), ('time', 's'), ('V', 'V'), ('x', None))
    """
    text = label.strip().strip('"').strip("'").strip()
    for pattern in (_BRACKETED, _SUFFIXED):
        match = pattern.match(text)
        if match and match.group("unit").lower() in _UNITS:
            return match.group("name").strip() or text, match.group("unit")
    if text.lower() in _UNITS:
        return text, text
    match = _BRACKETED.match(text)
    if match and match.group("unit") and match.group("name").strip():
        # Units Upstroke does not know ("Stim (a.u.)"): the column is kept, not analysed.
        return match.group("name").strip(), match.group("unit")
    return text, None


def read(path: str | os.PathLike) -> Recording:
    """Open a delimited text recording.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Recording
        One sweep starting at the first sample's time; one channel per signal column, named as
        in the header; ``format`` is ``"text"``.

    Raises
    ------
    RecordingError
        For binary content, a missing or unit-less header, no time column, no signal column,
        a non-numeric or missing cell (with its line number), NaN or Inf samples (how many and
        the first line), uneven sampling, or fewer than
        :data:`analysis.recording.MIN_SAMPLES_PER_SWEEP` samples.
    """
    origin = os.fspath(path)
    lines = _head_lines(origin)
    header_at, labels, delimiter = _find_header(lines, origin)
    columns = _columns(labels, origin)
    time_index = next(i for i, c in enumerate(columns) if c.kind == "time")
    signals = [i for i in range(len(columns)) if i != time_index]
    body = _Body(origin, skip=header_at + 1)
    values = _parse_numbers(body, delimiter, len(columns), origin)
    row_line = _RowLines(body)
    for i, col in enumerate(columns):
        _check_finite_column(values[:, i], col.label, origin, row_line)
    n = values.shape[0]
    if n < MIN_SAMPLES_PER_SWEEP:
        raise RecordingError(
            origin, f"only {n} samples", f"an analysis needs at least {MIN_SAMPLES_PER_SWEEP}; export a longer stretch",
        )
    time_col = columns[time_index]
    t_s = values[:, time_index] * time_col.factor
    resolution_s = _time_resolution(body, delimiter, time_index) * time_col.factor
    rate_hz = rate_from_times(
        t_s, origin, what=f"the times in column {time_col.label!r}", resolution_s=resolution_s,
        line_of=lambda i: f"line {row_line(i)}",
    )
    data = np.stack([values[:, i] * columns[i].factor for i in signals])[:, np.newaxis, :]
    metadata = {
        "delimiter": {"\t": "tab", ",": "comma", ";": "semicolon", None: "spaces"}[delimiter],
        "time_column": time_col.label,
        "columns_in_file": {columns[i].name: columns[i].label for i in signals},
        "evenness_tolerance": f"{RELATIVE_TOLERANCE:.0%} of the sample interval",
    }
    return Recording.from_array(
        data, rate_hz, units=[columns[i].units for i in signals],
        channel_names=[columns[i].name for i in signals], sweep_starts_s=[float(t_s[0])],
        source_path=origin, metadata=metadata, format="text",
    )


def _head_lines(origin: str) -> list[str]:
    """The complete lines among the file's first :data:`HEAD_BYTES` (enough for any header)."""
    with open(origin, "rb") as fh:
        raw = fh.read(HEAD_BYTES + 1)
    if b"\x00" in raw[:65536]:
        raise RecordingError(
            origin, "is not a text file (it holds binary data)",
            "give a delimited text export (CSV or TSV), or the recording in its own format",
        )
    if len(raw) > HEAD_BYTES:
        raw = raw[: raw.rfind(b"\n", 0, HEAD_BYTES) + 1]  # drop the line cut in two
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")  # older exports; only the header can hold such characters
    # Universal newlines, as the file is read later (str.splitlines would also split on \f).
    return text.replace("\r\n", "\n").replace("\r", "\n").split("\n")


class _Body:
    """The file's lines after the header, read from disk each time they are walked.

    Data lines are digits, signs, points and delimiters, so Latin-1 decodes them whatever the
    file's encoding; nothing is held in memory between walks.
    """

    def __init__(self, origin: str, *, skip: int) -> None:
        self.origin = origin
        self.skip = skip
        self.first_line = skip + 1  # 1-based number of the first line after the header

    def __iter__(self):
        with open(self.origin, encoding="latin-1") as fh:
            for _ in range(self.skip):
                next(fh, None)
            yield from fh


def _find_header(lines: list[str], origin: str) -> tuple[int, list[str], str | None]:
    """The header's line index, its cells (names with units) and the cell delimiter."""
    content = [i for i, line in enumerate(lines) if line.strip() and not line.lstrip().startswith("#")]
    if not content:
        raise RecordingError(origin, "holds no data (only blank or comment lines)", "export the recording again")
    at = content[0]
    first = lines[at]
    delimiter = next((d for d in ("\t", ",", ";") if d in first), None)
    cells = _split_header(first, delimiter)
    if all(_is_number(c) for c in cells):
        raise RecordingError(
            origin, "has no header line naming the columns and their units",
            "add a first line such as 'time_s,Vm_mV' (or 't (ms)<TAB>Vm (mV)')",
        )
    if all(parse_label(c)[1] is None for c in cells) and len(content) > 1:
        # A line of names followed by a line of units ("time,Vm" then "s,mV").
        unit_cells = _split_header(lines[content[1]], delimiter)
        if len(unit_cells) == len(cells) and all(u.strip().lower() in _UNITS for u in unit_cells):
            return content[1], [f"{c} ({u.strip()})" for c, u in zip(cells, unit_cells)], delimiter
    return at, cells, delimiter


def _split_header(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        cells = _WS_CELL.findall(line)
    else:
        cells = [c.strip() for c in line.split(delimiter)]
    while cells and not cells[-1]:
        cells.pop()  # a trailing delimiter
    return cells


def _columns(labels: list[str], origin: str) -> list[_Column]:
    """The header's columns. A column whose units are unknown or missing is kept as an
    auxiliary channel (kind ``"unknown"``, units as written), as long as some column holds a
    voltage: the membrane potential is chosen among the voltage columns, the rest is not analysed."""
    columns = []
    for label in labels:
        name, unit = parse_label(label)
        if unit is not None and unit.lower() in _UNITS:
            kind, shown, factor = _UNITS[unit.lower()]
        else:
            kind, shown, factor = "unknown", unit or "", 1.0
        columns.append(_Column(label.strip().strip('"').strip(), name, kind, shown, factor))
    unitless = [c for c in columns if c.kind == "unknown" and not c.units]
    if unitless and not any(c.kind == "voltage" for c in columns):
        label = unitless[0].label
        if len(label) > 40:  # not a column name but a line of something else: quote its start
            label = label[:37] + "..."
        raise RecordingError(
            origin, f"column {label!r} has no units, and no column is a voltage",
            "write each column's units in the header, e.g. 't (ms)' or 'time_s' for the time and "
            "'Vm (mV)' or 'Vm_V' for the membrane potential (currents in pA, nA or pA/pF)",
        )
    if not any(c.kind == "time" for c in columns):
        raise RecordingError(
            origin, "has no time column (a column in s or ms)",
            "add one, e.g. 'time_s' or 't (ms)', with one time per sample",
        )
    times = [i for i, c in enumerate(columns) if c.kind == "time"]
    signals = [c for i, c in enumerate(columns) if i != times[0]]
    if not signals:
        raise RecordingError(
            origin, "the recording has no channels: only a time column",
            "export at least one voltage column, e.g. 'Vm_mV'",
        )
    if len(times) > 1:
        extra = columns[times[1]].label
        raise RecordingError(
            origin, f"has a second time column ({extra!r})", "keep one time column per file",
        )
    return columns


def _parse_numbers(body: _Body, delimiter: str | None, n_columns: int, origin: str) -> np.ndarray:
    """All data rows as floats, or the first bad cell with its line number."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # numpy's "input contained no data": refused below
            values = np.loadtxt(
                origin, delimiter=delimiter, comments="#", dtype=np.float64, ndmin=2,
                usecols=range(n_columns), quotechar='"', skiprows=body.skip, encoding="latin-1",
            )
    except (ValueError, IndexError) as exc:
        _raise_first_bad_cell(body, delimiter, n_columns, origin)
        # The line-by-line scan found every cell a number; say what numpy's parser refused.
        raise RecordingError(
            origin, f"the numbers could not be parsed ({' '.join(str(exc).split())})", _FIX_CELLS,
        ) from None
    if values.shape[0] == 0:
        raise RecordingError(origin, "has a header but no samples", "export the recording again")
    return values


def _raise_first_bad_cell(body: _Body, delimiter: str | None, n_columns: int, origin: str) -> None:
    for k, line in enumerate(body):
        stripped = line.split("#", 1)[0].strip()
        if not stripped:
            continue
        cells = stripped.split(delimiter) if delimiter else stripped.split()
        line_no = body.first_line + k
        if len(cells) < n_columns:
            raise RecordingError(
                origin, f"line {line_no} has {len(cells)} cell(s) where the header names {n_columns}",
                "every line needs one value per column; fix or delete that line",
            )
        for j, cell in enumerate(cells[:n_columns]):
            text = cell.strip().strip('"')
            if not _is_number(text):
                what = "is empty" if not text else f"holds {text!r}, not a number"
                hint = " (decimal commas are not read; export with a decimal point)" if _DECIMAL_COMMA.match(text) else ""
                raise RecordingError(origin, f"line {line_no}, column {j + 1} {what}{hint}", _FIX_CELLS)


class _RowLines:
    """Maps a data row's index to its line number in the file (built only when asked)."""

    def __init__(self, body: _Body) -> None:
        self._body = body

    def __call__(self, row: int) -> int:
        seen = -1
        for k, line in enumerate(self._body):
            if line.split("#", 1)[0].strip():
                seen += 1
                if seen == row:
                    return self._body.first_line + k
        raise IndexError(row)


def _check_finite_column(values: np.ndarray, label: str, origin: str, row_line: Callable[[int], int]) -> None:
    bad = ~np.isfinite(values)
    if bad.any():
        raise RecordingError(
            origin, f"{int(bad.sum())} NaN or Inf value(s) in column {label!r}, first at line "
            f"{row_line(int(np.argmax(bad)))}",
            "remove or interpolate them before analysis",
        )


def _time_resolution(body: _Body, delimiter: str | None, index: int, rows: int = 1000) -> float:
    """The step in which times were written (1e-4 for four decimals), in the column's units."""
    decimals = 0
    seen = 0
    for line in body:
        stripped = line.split("#", 1)[0].strip()
        if not stripped:
            continue
        cells = stripped.split(delimiter) if delimiter else stripped.split()
        cell = cells[index].strip().strip('"').lower()
        if "e" in cell:
            return 0.0  # exponent notation: written with full precision
        if "." in cell:
            decimals = max(decimals, len(cell.split(".", 1)[1]))
        seen += 1
        if seen >= rows:
            break
    return 10.0 ** -decimals


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True
