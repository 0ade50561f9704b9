"""What two vertical cursors on a trace measure: the samples between them, summarised.

The desktop app draws the cursors; this module does the arithmetic, so the numbers a user reads
beside the trace come from the same Qt-free core as every other measurement and can be checked
against numpy in a notebook.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from analysis.recording import Recording

__all__ = ["CursorReadout", "readout_samples", "readout"]


@dataclass(frozen=True)
class CursorReadout:
    """The measurement between two cursors on one sweep of one channel.

    Attributes
    ----------
    t0_s, t1_s : float
        The cursors' times from the start of the sweep, in seconds, earlier first.
    first_sample, last_sample : int
        The first and last sample (indices in the sweep) that lie between the cursors,
        both included.
    n_samples : int
        ``last_sample - first_sample + 1``; 0 when no sample lies between the cursors.
    delta_t_ms : float
        ``t1_s - t0_s`` in milliseconds.
    value0, value1 : float
        The signal at the first and at the last sample between the cursors, in ``units``.
    delta_value : float
        ``value1 - value0``, in ``units``.
    mean_value, min_value, max_value : float
        Over the samples between the cursors, in ``units``.
    slope_per_s : float
        Least-squares linear slope of the samples against their times, in ``units`` per second;
        NaN with fewer than two samples.
    beats : tuple of int
        Positions (in the ``upstrokes_s`` given) of the beats whose upstroke lies between the
        cursors.
    units : str
        The channel's units (mV for a membrane potential).
    """

    t0_s: float
    t1_s: float
    first_sample: int
    last_sample: int
    n_samples: int
    delta_t_ms: float
    value0: float
    value1: float
    delta_value: float
    mean_value: float
    min_value: float
    max_value: float
    slope_per_s: float
    beats: tuple[int, ...] = field(default_factory=tuple)
    units: str = "mV"

    @property
    def n_beats(self) -> int:
        """How many beats the cursors span (upstrokes between them)."""
        return len(self.beats)


def sample_span(t0_s: float, t1_s: float, fs_hz: float, n_samples: int) -> tuple[int, int]:
    """First and last sample index with ``t0_s <= i / fs_hz <= t1_s``, clipped to the sweep.

    Returns ``(first, last)``; ``last < first`` when no sample lies in the span.
    """
    lo, hi = sorted((float(t0_s), float(t1_s)))
    # A cursor placed exactly on a sample keeps it: allow for float rounding of i / fs.
    first = max(0, math.ceil(lo * fs_hz - 1e-9))
    last = min(n_samples - 1, math.floor(hi * fs_hz + 1e-9))
    return first, last


def readout_samples(
    samples: np.ndarray,
    fs_hz: float,
    t0_s: float,
    t1_s: float,
    *,
    first_sample: int = 0,
    upstrokes_s: np.ndarray | None = None,
    units: str = "mV",
) -> CursorReadout:
    """Summarise the samples between two cursor times.

    Parameters
    ----------
    samples : ndarray
        Consecutive samples of one sweep, in ``units``; ``samples[0]`` is sample ``first_sample``
        of the sweep (so a caller can pass only the stretch around the cursors).
    fs_hz : float
        Sampling rate, in Hz.
    t0_s, t1_s : float
        The cursors' times from the start of the sweep, in seconds, in either order.
    first_sample : int
        Index in the sweep of ``samples[0]``.
    upstrokes_s : ndarray or None
        Upstroke times of the sweep's beats, in seconds from the sweep's start; None for no beats.
    units : str
        The samples' units, carried into the result.

    Returns
    -------
    CursorReadout
        Values are NaN when no sample lies between the cursors.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.linspace(-60.0, -40.0, 1001)      # 20 mV over 1 s at 1 kHz
    >>> r = readout_samples(v, 1000.0, 0.25, 0.75)
    >>> round(r.delta_value, 6), round(r.slope_per_s, 6), r.n_samples
    (10.0, 20.0, 501)
    """
    data = np.asarray(samples, dtype=np.float64).reshape(-1)
    lo, hi = sorted((float(t0_s), float(t1_s)))
    first, last = sample_span(lo, hi, fs_hz, first_sample + len(data))
    first = max(first, first_sample)
    nan = float("nan")
    beats: tuple[int, ...] = ()
    if upstrokes_s is not None:
        ups = np.asarray(upstrokes_s, dtype=np.float64).reshape(-1)
        beats = tuple(int(i) for i in np.flatnonzero((ups >= lo) & (ups <= hi)))
    if last < first:
        return CursorReadout(
            lo, hi, first, last, 0, (hi - lo) * 1e3, nan, nan, nan, nan, nan, nan, nan, beats, units
        )
    seg = data[first - first_sample : last - first_sample + 1]
    slope = nan
    if len(seg) >= 2:
        t = (np.arange(first, last + 1, dtype=np.float64)) / fs_hz
        slope = float(np.polyfit(t - t.mean(), seg, 1)[0])
    return CursorReadout(
        t0_s=lo,
        t1_s=hi,
        first_sample=int(first),
        last_sample=int(last),
        n_samples=int(len(seg)),
        delta_t_ms=(hi - lo) * 1e3,
        value0=float(seg[0]),
        value1=float(seg[-1]),
        delta_value=float(seg[-1] - seg[0]),
        mean_value=float(seg.mean()),
        min_value=float(seg.min()),
        max_value=float(seg.max()),
        slope_per_s=slope,
        beats=beats,
        units=units,
    )


def readout(
    recording: Recording,
    t0_s: float,
    t1_s: float,
    *,
    sweep: int = 0,
    channel: int | str = 0,
    upstrokes_s: np.ndarray | None = None,
) -> CursorReadout:
    """Summarise a recording between two cursor times, reading only the samples between them.

    Parameters
    ----------
    recording : Recording
    t0_s, t1_s : float
        Cursor times from the start of ``sweep``, in seconds, in either order.
    sweep : int
    channel : int or str
    upstrokes_s : ndarray or None
        Upstroke times of the sweep's beats (seconds from the sweep's start).

    Returns
    -------
    CursorReadout
        In the channel's units.
    """
    fs = recording.sampling_rate_hz
    first, last = sample_span(t0_s, t1_s, fs, recording.n_samples(sweep))
    samples = recording.sweep(sweep, channel, start=first, stop=max(first, last + 1))
    return readout_samples(
        samples, fs, t0_s, t1_s, first_sample=first, upstrokes_s=upstrokes_s,
        units=recording.units(channel),
    )
