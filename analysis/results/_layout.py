"""The results file's layout for many recordings (schema 2): tables across recordings, an index.

Every table is stored once for the whole file, column-wise, its rows recording after recording;
the ``/index`` table (one row per recording) says where each recording's rows start and how many
there are. Opening a file reads the index, the distinct settings, the provenance and the sweep
geometry; a recording's tables are read the first time they are used (:class:`LazyTables`),
together with those of the recordings next to it, so that opening costs the same for 10 or 1,000
recordings and a pass over all of them reads in large slices. See docs/results-format.md.
"""

from __future__ import annotations

import os
import weakref
from typing import Mapping, Sequence

import numpy as np

from analysis.decisions import FIELDS as DECISION_FIELDS
from analysis.decisions import DecisionLog
from analysis.recording import recording_id
from analysis.results._h5 import checked, damaged, read_columns, str_dtype, text, text_array
from analysis.results._legacy import conditions_from_columns
from analysis.results._records import LAZY_FIELDS, StoredRecording
from analysis.table import BeatTable

__all__ = ["OWNED", "LazyTables", "read_v2", "write_v2"]

#: Tables whose rows belong to recordings; ``/index`` holds ``NAME_start`` and ``NAME_count``.
PER_RECORDING = ("beats", "decisions", "conditions", "summary", "ensembles", "warnings", "sweeps", "sweep_geometry")
#: Every top-level name this layout writes; any other top-level object is copied through.
OWNED = ("index", "settings", "provenance", "ensemble_samples", *PER_RECORDING, "default_settings", "recordings")
#: Recordings gathered into one write.
WRITE_BLOCK = 256
#: Recordings whose tables are read together on first use.
READ_BLOCK = 64


# -- writing ----------------------------------------------------------------------------------
def _kind(arr: np.ndarray) -> str:
    return "text" if arr.dtype.kind in "OUS" else ("bool" if arr.dtype.kind == "b" else "number")


def _fill(kind: str, dtype, n: int) -> np.ndarray:
    if kind == "text":
        return np.full(n, "", dtype=object)
    if kind == "bool":
        return np.zeros(n, dtype=bool)
    return np.full(n, np.nan if np.dtype(dtype).kind == "f" else 0, dtype=dtype)


class _Table:
    """A table of the file, grown block by block; columns may appear in any block."""

    def __init__(self, parent, name: str) -> None:
        self.group = parent.create_group(name)
        self.rows = 0
        self.chunk: int | None = None
        self.order: list[str] = []  # the columns in the order first given

    def append(self, parts: Sequence[Mapping[str, np.ndarray]], counts: Sequence[int]) -> None:
        total = int(sum(counts))
        if self.chunk is None:
            self.chunk = int(min(8192, max(64, total)))
        known = set(self.order)
        for p in parts:
            for name in p:
                if name not in known:
                    known.add(name)
                    self.order.append(name)
        for name in self.order:
            self._append_column(name, [p.get(name) for p in parts], counts, total)
        self.rows += total

    def _append_column(self, name: str, arrays: list, counts: Sequence[int], total: int) -> None:
        ds = self.group.get(name)
        given = [np.asarray(a) for a in arrays if a is not None]
        if ds is not None:
            kind = "text" if ds.dtype.kind == "O" else ("bool" if ds.dtype.kind == "b" else "number")
            dtype = ds.dtype
        else:
            full = [a for a in given if a.size] or given
            kind = _kind(full[0])
            dtype = object if kind == "text" else np.result_type(*[a.dtype for a in full])
        parts = [np.asarray(a) if a is not None else _fill(kind, dtype, n) for a, n in zip(arrays, counts)]
        if ds is None:
            parts.insert(0, _fill(kind, dtype, self.rows))
        data = np.concatenate(parts) if parts else np.empty(0, dtype=dtype)
        data = text_array(data) if kind == "text" else data.astype(dtype, copy=False)
        if ds is None:
            self.group.create_dataset(
                name, data=data, maxshape=(None,), chunks=(self.chunk,), track_times=False,
                **({"dtype": str_dtype()} if kind == "text" else {}),
            )
            return
        if total:
            ds.resize((self.rows + total,))
            ds[self.rows:] = data

    def finish(self, order: Sequence[str] = ()) -> None:
        names = list(order) + [n for n in self.order if n not in order]
        self.group.attrs.create("columns", np.array(names, dtype=object), dtype=str_dtype())


def _order(recordings: Sequence[StoredRecording], field: str) -> list[str]:
    seen: dict[str, None] = {}
    for r in recordings:
        for name in getattr(r, field):
            seen.setdefault(name, None)
    return list(seen)


class _Writer:
    def __init__(self, f, folder: str) -> None:
        self.folder = folder
        self.tables = {name: _Table(f, name) for name in ("index", "settings", "provenance", "ensemble_samples", *PER_RECORDING)}
        self.settings_rows: dict[tuple[str, int, str], int] = {}
        self.beat_order: dict[str, None] = {}
        self.summary_order: dict[str, None] = {}

    def block(self, recs: Sequence[StoredRecording]) -> None:
        index: dict[str, list] = {}
        per: dict[str, list[dict]] = {name: [] for name in PER_RECORDING}
        pos = {name: self.tables[name].rows for name in PER_RECORDING}
        samples: list[np.ndarray] = []
        sample_pos = self.tables["ensemble_samples"].rows
        provenance = []
        for r in recs:
            parts = _parts(r, sample_pos)
            ens = [np.asarray(v, dtype=np.float64).ravel() for v, _, _ in r.ensembles]
            samples += ens
            sample_pos += sum(v.size for v in ens)
            row = self._index_row(r)
            for name in PER_RECORDING:
                per[name].append(parts[name])
                count = len(next(iter(parts[name].values()))) if parts[name] else 0
                row[f"{name}_start"], row[f"{name}_count"] = np.int64(pos[name]), np.int64(count)
                pos[name] += count
            for key, value in row.items():
                index.setdefault(key, []).append(value)
            provenance.append({k: np.array([v], dtype=object) for k, v in r.provenance.items()})
            for name in r.beats.names:
                self.beat_order.setdefault(name, None)
            for name in r.summary:
                self.summary_order.setdefault(name, None)
        for name in PER_RECORDING:
            counts = [len(next(iter(p.values()))) if p else 0 for p in per[name]]
            self.tables[name].append(per[name], counts)
        self.tables["provenance"].append(provenance, [1] * len(recs))
        flat = np.concatenate(samples) if samples else np.empty(0)
        self.tables["ensemble_samples"].append([{"v_mV": flat}], [flat.size])
        self.tables["index"].append([{k: np.asarray(v) for k, v in index.items()}], [len(recs)])

    def _index_row(self, r: StoredRecording) -> dict:
        key = (r.settings_json, int(r.settings_schema), r.settings_hash)
        row = self.settings_rows.get(key)
        if row is None:
            row = self.settings_rows[key] = len(self.settings_rows)
            self.tables["settings"].append([{
                "json": np.array([r.settings_json], dtype=object), "schema_version": np.array([key[1]], dtype=np.int64),
                "hash": np.array([r.settings_hash], dtype=object),
            }], [1])
        out = {
            "id": recording_id(r.sha256), "label": r.label, "source_path": r.source_path,
            "source_relpath": _relpath(r, self.folder), "sha256": r.sha256,
            "source_bytes": np.int64(r.source_bytes), "reader": r.reader,
            "channel": np.int64(r.channel), "channel_name": r.channel_name, "units": r.units,
            "ljp_mV": np.float64(r.ljp_mV), "sampling_rate_hz": np.float64(r.sampling_rate_hz),
            "all_sweeps": np.int64(r.sweeps is None), "settings_row": np.int64(row),
            "beat_columns": ",".join(r.beats.names), "summary_columns": ",".join(r.summary),
        }
        return out

    def finish(self) -> None:
        for name, table in self.tables.items():
            order = {"beats": list(self.beat_order), "summary": list(self.summary_order)}.get(name, ())
            table.finish(order)


def _relpath(r: StoredRecording, folder: str) -> str:
    if not (r.sha256 and os.path.isabs(r.source_path)):
        return ""
    try:
        return os.path.relpath(r.source_path, folder).replace(os.sep, "/")
    except ValueError:  # another drive on Windows
        return ""


def _parts(r: StoredRecording, sample_pos: int) -> dict[str, dict[str, np.ndarray]]:
    conds = r.conditions
    sizes = np.array([np.size(v) for v, _, _ in r.ensembles], dtype=np.int64)
    return {
        "beats": r.beats.columns(),
        "decisions": r.decisions.columns(),
        "conditions": {
            "name": np.array([c.name for c in conds], dtype=object),
            "unit": np.array([c.unit for c in conds], dtype=object),
            "start": np.array([c.start for c in conds], dtype=np.float64),
            "end": np.array([c.end for c in conds], dtype=np.float64),
            "steady_kind": np.array([c.steady.kind for c in conds], dtype=object),
            "steady_value": np.array([c.steady.value for c in conds], dtype=np.float64),
        },
        "summary": dict(r.summary),
        "ensembles": {
            "start": sample_pos + np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64) if sizes.size else sizes,
            "count": sizes,
            "fs_hz": np.array([fs for _, fs, _ in r.ensembles], dtype=np.float64),
            "t0_s": np.array([t0 for _, _, t0 in r.ensembles], dtype=np.float64),
        },
        "warnings": {"text": np.array(list(r.warnings), dtype=object)},
        "sweeps": {"sweep": np.array([] if r.sweeps is None else list(r.sweeps), dtype=np.int64)},
        "sweep_geometry": {
            "start_s": np.asarray(r.sweep_starts_s, dtype=np.float64),
            "length": np.asarray(r.sweep_lengths, dtype=np.int64),
        },
    }


def write_v2(f, recordings: Sequence[StoredRecording], folder: str) -> None:
    """Write ``recordings`` into the open file ``f`` in the schema-2 layout, in large blocks."""
    w = _Writer(f, folder)
    for i in range(0, len(recordings), WRITE_BLOCK):
        w.block(recordings[i:i + WRITE_BLOCK])
    w.finish()


# -- reading ----------------------------------------------------------------------------------
def _names(text_value: str) -> list[str]:
    return [n for n in text_value.split(",") if n]


def _table(f, name: str) -> dict[str, np.ndarray]:
    group = f[name]
    return read_columns(group) if len(group.attrs["columns"]) else {}


def _spans(cols: Mapping[str, np.ndarray], f, n: int) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Each per-recording table's (starts, counts), checked against the table's length."""
    out = {}
    for name in PER_RECORDING:
        starts = np.asarray(cols[f"{name}_start"], dtype=np.int64) if n else np.empty(0, np.int64)
        counts = np.asarray(cols[f"{name}_count"], dtype=np.int64) if n else np.empty(0, np.int64)
        group = f[name]
        first = text(group.attrs["columns"][0]) if len(group.attrs["columns"]) else None
        rows = checked(group[first]).shape[0] if first is not None else 0
        if n and (starts.min() < 0 or counts.min() < 0 or (starts + counts).max() > rows):
            raise ValueError(f"the index points outside the {name} table")
        out[name] = (starts, counts)
    return out


def read_v2(f, path: str) -> list[tuple[StoredRecording, str]]:
    """The recordings of an open schema-2 file, lazily, with their stored relative source paths.

    Reads the index, the distinct settings, the provenance and the sweep geometry now; the
    recordings' tables are read on first use from ``f``, which the returned recordings then own
    (it is closed once every recording's tables are read, or by :meth:`LazyTables.close`).
    """
    cols = _table(f, "index")
    n = len(cols["id"]) if cols else 0
    spans = _spans(cols, f, n)
    settings = _table(f, "settings")
    prov = _table(f, "provenance")
    sweeps = _table(f, "sweeps").get("sweep", np.empty(0, np.int64))
    geometry = _table(f, "sweep_geometry")
    settings_row = np.asarray(cols.get("settings_row", []), dtype=np.int64)
    if n and (settings_row.min() < 0 or settings_row.max() >= len(settings.get("json", ()))):
        raise ValueError("the index points outside the settings table")
    if n and any(len(v) != n for v in prov.values()):
        raise ValueError("the provenance table does not have one row per recording")
    loader = LazyTables(f, path, cols, spans)
    out = []
    for i in range(n):
        s, c = spans["sweeps"][0][i], spans["sweeps"][1][i]
        gs, gc = spans["sweep_geometry"][0][i], spans["sweep_geometry"][1][i]
        k = int(settings_row[i])
        r = StoredRecording.__new__(StoredRecording)
        r.__dict__.update(
            source_path=str(cols["source_path"][i]), label=str(cols["label"][i]), sha256=str(cols["sha256"][i]),
            source_bytes=int(cols["source_bytes"][i]) if "source_bytes" in cols else -1,
            reader=str(cols["reader"][i]), channel=int(cols["channel"][i]), channel_name=str(cols["channel_name"][i]),
            units=str(cols["units"][i]),
            sweeps=None if int(cols["all_sweeps"][i]) else tuple(int(x) for x in sweeps[s:s + c]),
            sampling_rate_hz=float(cols["sampling_rate_hz"][i]),
            sweep_starts_s=tuple(float(x) for x in geometry["start_s"][gs:gs + gc]) if gc else (),
            sweep_lengths=tuple(int(x) for x in geometry["length"][gs:gs + gc]) if gc else (),
            provenance={key: str(v[i]) for key, v in prov.items() if str(v[i])},
            ljp_mV=float(cols["ljp_mV"][i]), settings_json=str(settings["json"][k]),
            settings_schema=int(settings["schema_version"][k]), settings_hash=str(settings["hash"][k]),
            _loader=loader, _row=i,
        )
        out.append((r, str(cols["source_relpath"][i])))
    loader.recordings = [weakref.ref(r) for r, _ in out]
    if not n:
        loader.close()
    return out


class LazyTables:
    """Reads recordings' tables from an open schema-2 file on first use, a block at a time.

    Errors while reading (a damaged table) raise :class:`~analysis.errors.ResultsFileError`
    naming the file, as opening would have.
    """

    def __init__(self, f, path: str, index: Mapping[str, np.ndarray], spans) -> None:
        self._f = f
        self.path = path
        self._beat_columns = index.get("beat_columns", np.empty(0, dtype=object))
        self._summary_columns = index.get("summary_columns", np.empty(0, dtype=object))
        self._spans = spans
        self._pending = set(range(len(self._beat_columns)))
        self._block: tuple | None = None  # (first row, its tables, its ensemble samples, its rows)
        self.recordings: list = []  # weak references: a recording no one holds is not filled

    def close(self) -> None:
        """Read every recording not read yet, then close the file."""
        if self._f is None:
            return
        for row in sorted(self._pending):
            if row in self._pending:
                self.fill(row)
        self._release()

    def _release(self) -> None:
        self._block = None
        f, self._f = self._f, None
        if f is not None:
            f.close()

    def fill(self, row: int) -> None:
        """Fill one recording's tables. The file is read a block of recordings at a time (one
        read per column for up to READ_BLOCK recordings), and the block's columns are kept until
        another block is read; only the recording asked for is built, so the first use of one
        recording costs the same whatever the number of recordings."""
        lo = row - row % READ_BLOCK
        try:
            if self._block is None or self._block[0] != lo or row not in self._block[3]:
                self._block = None  # the previous block's columns go before the next is read
                rows = [
                    i for i in range(lo, min(lo + READ_BLOCK, len(self.recordings)))
                    if i in self._pending and (i == row or self.recordings[i]() is not None)
                ]
                tables = {name: self._read_span(name, rows) for name in LAZY_FIELDS}
                self._block = (lo, tables, self._samples(tables["ensembles"]), set(rows))
            _, tables, samples, _ = self._block
            values = self._one(row, tables, samples)
        except (OSError, KeyError, ValueError, TypeError, RuntimeError, IndexError) as exc:
            raise damaged(self.path, exc) from None
        r = self.recordings[row]()
        if r is not None:
            r.__dict__.update(values)
        self._pending.discard(row)
        if not self._pending:
            self._release()

    def _read_span(self, name: str, rows: list[int]):
        starts, counts = self._spans[name]
        lo = int(min(starts[i] for i in rows))
        hi = int(max(starts[i] + counts[i] for i in rows))
        group = self._f[name]
        cols = read_columns(group, lo, hi) if len(group.attrs["columns"]) else {}
        return lo, cols

    def _samples(self, ensembles) -> tuple[int, np.ndarray]:
        _, cols = ensembles
        if not cols or not len(cols["start"]):
            return 0, np.empty(0)
        first = int(cols["start"].min())
        last = int((cols["start"] + cols["count"]).max())
        if first < 0 or cols["count"].min() < 0:
            raise ValueError("the ensembles table points outside the samples")
        v = checked(self._f["ensemble_samples"]["v_mV"])[first:last]
        if v.size != last - first:
            raise ValueError("the ensembles table points outside the samples")
        return first, v

    def _rows(self, name: str, i: int, tables, names=None) -> dict[str, np.ndarray]:
        lo, cols = tables[name]
        s = int(self._spans[name][0][i]) - lo
        c = int(self._spans[name][1][i])
        keep = cols if names is None else {n: cols[n] for n in names}
        return {n: v[s:s + c] for n, v in keep.items()}

    def _one(self, i: int, tables, samples) -> dict:
        beat_names = _names(str(self._beat_columns[i]))
        decisions = self._rows("decisions", i, tables)
        if len(decisions) and list(decisions) != list(DECISION_FIELDS):
            raise KeyError("decisions")
        ens = self._rows("ensembles", i, tables)
        first, v = samples
        ensembles = [
            (v[int(s) - first:int(s) - first + int(c)].copy(), float(fs), float(t0))
            for s, c, fs, t0 in zip(ens.get("start", ()), ens.get("count", ()), ens.get("fs_hz", ()), ens.get("t0_s", ()))
        ]
        beats = self._rows("beats", i, tables, beat_names)
        return {
            "beats": BeatTable(beats),
            "decisions": DecisionLog.from_columns(decisions) if decisions else DecisionLog(),
            "conditions": conditions_from_columns(self._rows("conditions", i, tables)) if tables["conditions"][1] else (),
            "summary": self._rows("summary", i, tables, _names(str(self._summary_columns[i]))),
            "ensembles": ensembles,
            "warnings": tuple(self._rows("warnings", i, tables).get("text", ())),
        }

