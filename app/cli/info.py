"""``upstroke info FILE [--json]``: what a recording holds, without analysing it.

Prints the format, the channels with their units and clamp mode, the sweeps, the sampling rate,
the samples per sweep and the duration; ``--json`` prints the same as one JSON object. Reads the
header only (no samples). Warns on stderr when no channel holds a membrane potential, since the
analysis needs one in mV.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from analysis import Recording, open_recording
from analysis.recording import CURRENT_CLAMP, VOLTAGE_CLAMP

__all__ = ["INJECTED_CURRENT", "add_parser", "clean_text", "describe", "format_text", "run", "warnings_for"]


def add_parser(subparsers: Any) -> argparse.ArgumentParser:
    """Register ``info`` with the command line."""
    parser = subparsers.add_parser(
        "info",
        help="what a recording holds: format, channels, sweeps, sampling rate, duration",
        description="Describe a recording (ABF, NWB or delimited text) without analysing it: "
        "format, channels with units and clamp mode, sweeps, sampling rate, samples per sweep "
        "and duration.",
    )
    parser.add_argument("file", metavar="FILE", help="the recording")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    parser.set_defaults(run=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Describe ``args.file``; exit status 0 (bad input raises InputError, exit 2)."""
    rec = open_recording(args.file)
    info = describe(rec)
    for warning in info["warnings"]:
        print(f"upstroke info: warning: {args.file}: {warning}", file=sys.stderr)
    if args.json:
        print(json.dumps(info, indent=2, ensure_ascii=False))
    else:
        print(format_text(info))
    return 0


def describe(rec: Recording) -> dict[str, Any]:
    """The facts ``info`` reports, as JSON-compatible values."""
    lengths = list(rec.sweep_lengths)
    meta = dict(rec.metadata)
    version = meta.get("abf_version") or meta.get("nwb_version")
    return {
        "file": rec.source_path,
        "format": rec.format,
        "format_version": version,
        "channels": [
            {"index": i, "name": c.name, "units": c.units, "clamp_mode": _role(rec, c.clamp_mode)}
            for i, c in enumerate(rec.channels)
        ],
        "n_sweeps": rec.n_sweeps,
        "gap_free": rec.is_gap_free,
        "sampling_rate_hz": rec.sampling_rate_hz,
        "samples_per_sweep": lengths,
        "sweep_starts_s": list(rec.sweep_starts_s),
        "duration_s": rec.duration_s,
        "metadata": _jsonable(meta),
        "warnings": warnings_for(rec),
    }


#: What a current channel is in a recording that also holds a membrane potential: the current
#: the amplifier injects in current clamp, not a voltage-clamp recording.
INJECTED_CURRENT = "current clamp (injected current)"


def _role(rec: Recording, clamp_mode: str) -> str:
    """A channel's clamp mode as ``info`` reports it: a current channel beside a membrane
    potential is the injected current of a current-clamp recording."""
    if clamp_mode == VOLTAGE_CLAMP and rec.current_clamp_channels():
        return INJECTED_CURRENT
    return clamp_mode


def warnings_for(rec: Recording) -> list[str]:
    """Plain-language warnings about what the analysis will not be able to use."""
    if rec.current_clamp_channels():
        return []
    units = ", ".join(sorted({c.units for c in rec.channels}))
    return [
        f"no channel is in current clamp (units: {units}); the analysis needs a membrane "
        "potential in mV. If the file mislabels a channel's units, they can be overridden "
        "when analysing"
    ]


def format_text(info: dict[str, Any]) -> str:
    """The human-readable report."""
    meta = info["metadata"]
    kind = {"abf": "ABF", "nwb": "NWB", "text": "delimited text"}.get(info["format"], info["format"])
    version = f" {info['format_version']}" if info["format_version"] else ""
    mode = _mode_text(str(meta.get("operation_mode") or ""), info["gap_free"])
    rate = info["sampling_rate_hz"]
    rows = [
        ("file", str(info["file"])),
        ("format", f"{kind}{version}{mode}"),
        ("channels", str(len(info["channels"]))),
    ]
    lines = [f"{k:<16}{v}" for k, v in rows]
    width = max(len(c["name"]) for c in info["channels"])
    unit_width = max(len(c["units"]) for c in info["channels"])
    for c in info["channels"]:
        lines.append(f"  {c['index']:>3}  {c['name']:<{width}}  {c['units']:<{unit_width}}  {c['clamp_mode']}")
    rows = [
        ("sweeps", _sweeps_text(info)),
        ("samples/sweep", _lengths_text(info["samples_per_sweep"])),
        ("sampling rate", f"{rate:g} Hz ({1e3 / rate:.4g} ms per sample)"),
        ("duration", _duration_text(info["duration_s"]) + ("" if info["gap_free"] else " recorded, all sweeps")),
    ]
    for key, label in (("protocol", "protocol"), ("recorded_at", "recorded"), ("comment", "comment")):
        if meta.get(key):
            rows.append((label, str(meta[key])))
    if meta.get("tags"):
        rows.append(("tags", "; ".join(f"{t['time_s']:g} s {t['comment']}" for t in meta["tags"][:10])))
    if meta.get("units_overridden"):
        rows.append(("units overridden", ", ".join(f"{k}: {v}" for k, v in meta["units_overridden"].items())))
    lines += [f"{k:<16}{v}" for k, v in rows]
    return "\n".join(lines)


def _mode_text(header_mode: str, gap_free: bool) -> str:
    """The acquisition mode beside the format, agreeing with the sweeps line: a header that
    declares sweeps but holds one continuous stretch is said to be read as gap-free."""
    if not header_mode:
        return " (gap-free)" if gap_free else ""
    if gap_free and "gap" not in header_mode.lower():
        return f" ({header_mode} in its header, one continuous sweep: read as gap-free)"
    return f" ({header_mode})"


def _sweeps_text(info: dict[str, Any]) -> str:
    n = info["n_sweeps"]
    if info["gap_free"]:
        return "1 (gap-free)"
    starts = info["sweep_starts_s"]
    steps = {round(b - a, 6) for a, b in zip(starts, starts[1:])}
    every = f", every {steps.pop():g} s" if len(steps) == 1 else ""
    return f"{n} (starting {starts[0]:g} s to {starts[-1]:g} s{every})"


def _lengths_text(lengths: list[int]) -> str:
    if len(set(lengths)) == 1:
        return str(lengths[0])
    return f"{min(lengths)} to {max(lengths)} (sweeps differ)"


def _duration_text(seconds: float) -> str:
    if seconds >= 120:
        return f"{seconds:.6g} s ({seconds / 60:.3g} min)"
    return f"{seconds:.6g} s"


def _jsonable(value: Any) -> Any:
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, str):
        return clean_text(value)
    if isinstance(value, bytes):
        return clean_text(value.decode("latin-1"))
    if value is None or isinstance(value, (bool, int, float)):
        return value
    return clean_text(str(value))


def clean_text(text: str) -> str:
    """A header string as text: cut at its first NUL (fixed-size header fields are NUL-padded and
    what follows is left-over memory), without control characters, trimmed."""
    text = text.split("\x00", 1)[0]
    return "".join(ch for ch in text if ch.isprintable() or ch in "\t").strip()
