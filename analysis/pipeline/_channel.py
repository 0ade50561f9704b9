"""Which channel of a recording holds the membrane potential, and whether its values can be one.

:func:`choose_channel` picks the current-clamp channel (or the one named) and refuses a
voltage-clamp channel with a fix; :func:`implausible_range_note` warns when a channel whose units
were overridden spans far beyond a membrane potential's range.
"""

from __future__ import annotations

import numpy as np

from analysis.beats import detect_beats
from analysis.errors import RecordingError
from analysis.recording import CURRENT_CLAMP, VOLTAGE_CLAMP, Recording

__all__ = ["choose_channel", "implausible_range_note", "looks_like_membrane_potential"]


def looks_like_membrane_potential(recording: Recording, channel: int, *, seconds: float = 20.0) -> bool:
    """Whether a channel's samples plainly look like a membrane potential in mV.

    True when the first ``seconds`` of the first sweep stay within about -100..+70 and hold at
    least one upstroke-like transient (found by the beat detector with the default settings).
    """
    fs = recording.sampling_rate_hz
    n = min(recording.n_samples(0), int(seconds * fs))
    x = recording.sweep(0, channel, 0, n)
    lo, hi = np.percentile(x, [0.5, 99.5])
    if not (-110.0 <= lo and hi <= 80.0 and hi - lo >= 20.0):
        return False

    return len(detect_beats(x, fs)) >= 1


def choose_channel(recording: Recording, channel: int | str | None) -> tuple[int, str | None]:
    """The channel to analyse and, when Upstroke picked it, a note saying which.

    Raises
    ------
    RecordingError
        For a voltage-clamp (current) channel, or when no channel holds a membrane potential;
        when a current channel plainly holds a membrane potential, the message says how to
        override its units.
    """
    path = recording.source_path
    if channel is not None:
        idx = recording.channel_index(channel)
        _refuse_if_current(recording, idx)
        return idx, None
    cc = recording.current_clamp_channels()
    if cc:
        idx = cc[0]
        ch = recording.channels[idx]
        if len(recording.channels) == 1:
            return idx, None
        others = ", ".join(f"{i}={c.name} ({c.units})" for i, c in enumerate(recording.channels) if i != idx)
        return idx, (
            f"analysed channel {idx} ({ch.name}, {ch.units}), the {'only' if len(cc) == 1 else 'first'} "
            f"current-clamp channel; others: {others} (choose with --channel)"
        )
    unknown = [i for i, c in enumerate(recording.channels) if c.clamp_mode not in (CURRENT_CLAMP, VOLTAGE_CLAMP)]
    if unknown:
        idx = unknown[0]
        ch = recording.channels[idx]
        return idx, f"analysed channel {idx} ({ch.name}) as mV: its units {ch.units!r} do not say what it holds"
    for i in range(recording.n_channels):
        _refuse_if_current(recording, i)
    raise RecordingError(path, "no current-clamp channel", "record the membrane potential in current clamp")


def _refuse_if_current(recording: Recording, idx: int) -> None:
    ch = recording.channels[idx]
    if ch.clamp_mode != VOLTAGE_CLAMP:
        return
    if looks_like_membrane_potential(recording, idx):
        hint = (
            f"its samples look like a membrane potential in mV: if the file mislabels them, "
            f"override the units with --units {idx}=mV"
        )
    else:
        hint = (
            f"Upstroke analyses a membrane potential recorded in current clamp: choose a mV channel, "
            f"or, if this channel holds a membrane potential mislabelled as {ch.units}, declare its "
            f"units with --units {idx}=mV"
        )
    raise RecordingError(
        recording.source_path,
        f"channel {idx} ({ch.name}) is in {ch.units}, a voltage-clamp (current) channel", hint,
    )


#: The widest span a membrane potential plausibly takes (mV): beyond it a channel's values are not
#: a membrane potential in mV (MEASUREMENTS.md: MDPs -50 to -90 mV, peaks up to about +40 mV).
_PLAUSIBLE_MV = (-150.0, 100.0)


def implausible_range_note(recording: Recording, idx: int, scale: float, sweeps: list[int], change: str) -> str | None:
    """A plain warning when a channel whose units were overridden spans far beyond a membrane
    potential's range (the gain the file states may be as wrong as its units), else None."""
    lo, hi = np.inf, -np.inf
    step = 1 << 20
    for sw in sweeps:
        n = recording.n_samples(sw)
        for a in range(0, n, step):
            x = recording.sweep(sw, idx, a, min(n, a + step))
            lo, hi = min(lo, float(np.min(x)) * scale), max(hi, float(np.max(x)) * scale)
    if not (np.isfinite(lo) and np.isfinite(hi)) or (lo >= _PLAUSIBLE_MV[0] and hi <= _PLAUSIBLE_MV[1]):
        return None
    ch = recording.channels[idx]
    return (
        f"channel {idx} ({ch.name}) spans {lo:.0f} to {hi:.0f} mV after its units override ({change}): "
        f"implausible for a membrane potential ({_PLAUSIBLE_MV[0]:g} to {_PLAUSIBLE_MV[1]:g} mV at most); "
        "the gain the file records is probably wrong too, so every voltage and dV/dt is off by that factor; "
        "check the amplifier's scaling before using these numbers"
    )
