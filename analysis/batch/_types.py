"""The plain records of a batch: one file's task and outcome, a batch's result, its errors.

They live below the modules that run tasks and write their results, so that each of those
imports them instead of one another.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from analysis.errors import InputError
from analysis.table import BeatTable

__all__ = ["BatchCancelled", "BatchResult", "ClusterError", "FileOutcome", "FileTask", "pack_columns", "unpack_columns"]


class BatchCancelled(Exception):
    """The batch was cancelled (cancel flag or Ctrl-C) before every file was analysed."""

    def __init__(self, done: int, total: int) -> None:
        self.done = done
        self.total = total
        super().__init__(f"batch cancelled after {done} of {total} file(s)")


class ClusterError(InputError):
    """Dask is not installed, or the scheduler given cannot be reached."""


# -- tables packed for travel ----------------------------------------------------------------
#: The tables of a task's ``meta`` that travel packed (dicts of equal-length columns).
_PACKED_META = ("summary", "decisions")


def pack_columns(cols: dict[str, np.ndarray]) -> tuple:
    """Equal-length columns as ``(names, keys, blocks)``: the columns of one dtype stacked into
    one 2-D array of ``blocks`` (text as one object array), ``keys`` naming each column's block."""
    names = tuple(cols)
    keys = tuple(np.asarray(cols[n]).dtype.str if np.asarray(cols[n]).dtype.kind != "U" else "|O" for n in names)
    blocks = {}
    for key in dict.fromkeys(keys):
        members = [np.asarray(cols[n]) for n, k in zip(names, keys) if k == key]
        blocks[key] = np.stack(members).astype(object if key == "|O" else key, copy=False)
    return names, keys, blocks


def unpack_columns(packed: tuple) -> dict[str, np.ndarray]:
    """The columns :func:`pack_columns` packed, in order (views into the blocks)."""
    names, keys, blocks = packed
    seen: dict[str, int] = {}
    out = {}
    for name, key in zip(names, keys):
        i = seen.get(key, 0)
        seen[key] = i + 1
        out[name] = blocks[key][i]
    return out


# -- one file, one task ----------------------------------------------------------------------
@dataclass(frozen=True)
class FileTask:
    """Everything one worker needs to analyse one file; plain values only, so it travels.

    Attributes
    ----------
    index : int
        Position in the batch (outcomes are put back in this order).
    path : str
        The path as the user gave or the batch found it; it names the file in the beat table
        and in messages.
    open_path : str
        The absolute path a worker opens (a cluster worker's working folder may differ).
    settings : dict or None
        ``Settings.to_dict()`` of the analysis settings; None for the defaults.
    channel : int, str or None
        The channel to analyse; None lets the analysis pick the current-clamp channel.
    sweeps : tuple of int, SweepSelection or None
        Sweeps to analyse; None for all.
    units : tuple of (channel, units) pairs or None
        Units to declare for channels that a file's header mislabels (as ``--units 0=mV``).
    conditions : tuple of str
        Conditions in their command-line syntax (:func:`analysis.conditions.parse_condition`),
        the same for every file.
    """

    index: int
    path: str
    open_path: str
    settings: dict[str, Any] | None = None
    channel: int | str | None = None
    sweeps: Any = None  # tuple of int, analysis.sweeps.SweepSelection or None
    units: tuple[tuple[int | str, str], ...] | None = None
    conditions: tuple[str, ...] = ()


@dataclass
class FileOutcome:
    """What came back from one task: results or the reason there are none.

    Attributes
    ----------
    index, path : int, str
        As in the :class:`FileTask`.
    columns : dict of str to ndarray
        The beat table's columns (empty when the file failed).
    warnings : list of str
        The analysis's warnings, one line each.
    meta : dict
        Plain values about the analysis: ``channel``, ``channel_name``, ``ljp_mV``,
        ``format``, ``sha256``, ``sampling_rate_hz``, ``n_sweeps``, ``duration_s``,
        ``settings`` (a dict) and ``elapsed_s``.
    error : str
        The one-line message of the :class:`~analysis.errors.InputError` that stopped the file;
        empty on success.
    fault : str
        The traceback of an unexpected exception (an internal fault, to be reported); empty
        otherwise.
    """

    index: int
    path: str
    columns: dict[str, np.ndarray] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    meta: dict[str, Any] = field(default_factory=dict)
    error: str = ""
    fault: str = ""

    @property
    def ok(self) -> bool:
        return not (self.error or self.fault)

    # A finished task travels back packed: each table's columns of one dtype as one 2-D array
    # (a few arrays per table instead of one per column), unpacked into views on arrival.
    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state["columns"] = pack_columns(self.columns)
        meta = dict(self.meta)
        for key in _PACKED_META:
            if isinstance(meta.get(key), dict):
                meta[key] = pack_columns(meta[key])
        state["meta"] = meta
        return state

    def __setstate__(self, state: dict[str, Any]) -> None:
        state["columns"] = unpack_columns(state["columns"])
        meta = state["meta"]
        for key in _PACKED_META:
            if isinstance(meta.get(key), tuple):
                meta[key] = unpack_columns(meta[key])
        self.__dict__.update(state)

    @property
    def reason(self) -> str:
        """One line saying why the file failed (empty on success)."""
        if self.error:
            return self.error
        if self.fault:
            last = [ln for ln in self.fault.strip().splitlines() if ln.strip()]
            return "internal error: " + (last[-1].strip() if last else "unknown") + "; please report it"
        return ""

    def beats(self):
        """The beat table (:class:`analysis.table.BeatTable`) rebuilt from the columns."""
        return BeatTable(self.columns) if self.columns else BeatTable.empty()


@dataclass
class BatchResult:
    """The outcomes of a batch, in input order.

    Attributes
    ----------
    outcomes : list of FileOutcome
        One per file, in the order the files were given.
    where : str
        Where the tasks ran: ``"this process"``, ``"N local processes"`` or the scheduler's
        address.
    """

    outcomes: list[FileOutcome]
    where: str = ""

    @property
    def succeeded(self) -> list[FileOutcome]:
        return [o for o in self.outcomes if o.ok]

    @property
    def failed(self) -> list[FileOutcome]:
        return [o for o in self.outcomes if not o.ok]

    @property
    def faults(self) -> list[FileOutcome]:
        return [o for o in self.outcomes if o.fault]

    def beats(self):
        """All good files' beat tables, one after another in input order."""
        return BeatTable.concat([o.beats() for o in self.succeeded])
