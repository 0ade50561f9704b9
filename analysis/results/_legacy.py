"""Reading results files of the first layout (schema 1): one group per recording.

Schema 1 kept every recording in its own group ``/recordings/NNNNNN/`` with dozens of small
datasets (docs/results-format.md, "Files of schema 1"). Such files are read whole when opened
(they were written for a few recordings); saving them again writes the current layout.
"""

from __future__ import annotations

import numpy as np

from analysis.conditions import Condition, SteadyState
from analysis.decisions import FIELDS as DECISION_FIELDS
from analysis.decisions import DecisionLog
from analysis.results._h5 import checked, read_columns, read_text_column, text
from analysis.results._records import StoredRecording
from analysis.table import BeatTable

__all__ = ["conditions_from_columns", "read_v1"]


def conditions_from_columns(cols: dict[str, np.ndarray]) -> tuple[Condition, ...]:
    """The conditions of a ``conditions`` table's columns."""
    return tuple(
        Condition(
            str(cols["name"][i]), float(cols["start"][i]), float(cols["end"][i]), str(cols["unit"][i]),
            SteadyState(str(cols["steady_kind"][i]), float(cols["steady_value"][i])),
        )
        for i in range(len(cols["name"]))
    )


def _read_recording(group) -> tuple[StoredRecording, str]:
    a = group.attrs
    sweeps = None if int(a["all_sweeps"]) else tuple(int(s) for s in a["sweeps"])
    settings = group["settings"]
    decision_cols = read_columns(group["decisions"])
    if list(decision_cols) != list(DECISION_FIELDS):
        raise KeyError("decisions")
    summary = group["summary"]
    ens = summary["ensemble"]
    ensembles = [
        (checked(ens[name])[()], float(ens[name].attrs["fs_hz"]), float(ens[name].attrs["t0_s"]))
        for name in sorted(ens, key=int)
    ]
    rec = StoredRecording(
        source_path=text(a["source_path"]),
        label=text(a["label"]),
        sha256=text(a["sha256"]),
        reader=text(a["reader"]),
        channel=int(a["channel"]),
        channel_name=text(a["channel_name"]),
        units=text(a["units"]),
        ljp_mV=float(a["ljp_mV"]),
        sweeps=sweeps,
        sampling_rate_hz=float(a["sampling_rate_hz"]),
        sweep_starts_s=tuple(float(x) for x in checked(group["sweep_starts_s"])[()]),
        sweep_lengths=tuple(int(x) for x in checked(group["sweep_lengths"])[()]),
        settings_json=text(checked(settings).asstr()[()]),
        settings_schema=int(settings.attrs["schema_version"]),
        settings_hash=text(settings.attrs["hash"]),
        beats=BeatTable(read_columns(group["beats"])),
        decisions=DecisionLog.from_columns(decision_cols),
        conditions=conditions_from_columns(read_columns(group["conditions"])),
        summary=read_columns(summary),
        ensembles=ensembles,
        warnings=tuple(read_text_column(checked(group["warnings"]))),
        provenance={k: text(v) for k, v in group["provenance"].attrs.items()},
    )
    return rec, text(a["source_relpath"])


def read_v1(f) -> list[tuple[StoredRecording, str]]:
    """Every recording of an open schema-1 file, with its stored relative source path."""
    recs_group = f["recordings"]
    return [_read_recording(recs_group[name]) for name in sorted(recs_group, key=int)]
