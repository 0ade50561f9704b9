"""The sampling rate of a recording given as sample times, and the refusal of uneven sampling.

Text exports and some NWB files store a time for every sample instead of a rate. Every
measurement in Upstroke (dV/dt, APDs, cycle lengths) assumes an even sampling grid, so times
that stray from one are refused rather than silently resampled.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from analysis.errors import RecordingError

__all__ = ["RELATIVE_TOLERANCE", "MIN_RATE_HZ", "MAX_RATE_HZ", "check_rate", "rate_from_times"]

#: Largest allowed distance of a sample time from the even grid, as a fraction of the sample
#: interval. 1 % keeps a single dropped or doubled sample (an error of 100 %) well outside it.
RELATIVE_TOLERANCE = 0.01
#: Sampling rates outside these are damage (or times in the wrong units), not a recording: no
#: patch-clamp digitiser samples faster than 10 MHz, and below 1 Hz pyabf's whole-hertz rate is 0
#: (common practice, no source).
MIN_RATE_HZ = 1.0
MAX_RATE_HZ = 1e7


def check_rate(
    rate_hz: float,
    origin: str,
    *,
    what: str = "the sampling rate",
    fix: str = "the file is damaged; open the original recording",
) -> float:
    """``rate_hz``, after refusing one outside :data:`MIN_RATE_HZ` to :data:`MAX_RATE_HZ`."""
    if not (np.isfinite(rate_hz) and MIN_RATE_HZ <= rate_hz <= MAX_RATE_HZ):
        raise RecordingError(
            origin, f"{what} is {rate_hz:.6g} Hz, outside the {MIN_RATE_HZ:g} Hz to "
            f"{MAX_RATE_HZ / 1e6:g} MHz of any recording", fix,
        )
    return float(rate_hz)


def rate_from_times(
    t_s: np.ndarray,
    origin: str,
    *,
    what: str = "the sample times",
    resolution_s: float = 0.0,
    line_of: Callable[[int], str] | None = None,
) -> float:
    """The sampling rate of evenly spaced sample times, in Hz.

    Parameters
    ----------
    t_s : ndarray, shape (n,)
        Sample times in seconds, n >= 2.
    origin : str
        The file, for error messages.
    what : str
        How to name the times in a message (``"the time column 't (ms)'"``).
    resolution_s : float
        The step in which the times were written (for example 1e-4 s for times printed with four
        decimals); rounding to it is not counted as unevenness unless the sample interval is a
        whole number of such steps (then the printed times are exact). 0 when the times are
        exact.
    line_of : callable or None
        Maps a sample index to the place a user can find it (``lambda i: f"line {i + 2}"``);
        None reports sample numbers.

    Returns
    -------
    float
        ``(n - 1) / (t[-1] - t[0])``: the rate of the best even grid through the first and last
        sample.

    Raises
    ------
    RecordingError
        When the times do not increase, when they are printed too coarsely to show the interval,
        when one step differs from the median step by more than twice the tolerance (a gap), or
        when any time lies further from the even grid than the tolerance,
        ``max(RELATIVE_TOLERANCE * interval, resolution_s / 2)``.

    Examples
    --------
    >>> rate_from_times(np.arange(1000) / 2000.0, "x.csv")
    2000.0
    """
    t = np.asarray(t_s, dtype=np.float64)
    where = line_of or (lambda i: f"sample {i}")
    if t.size < 2:
        raise RecordingError(origin, f"{what} hold fewer than two samples", "export a longer stretch")
    span = float(t[-1] - t[0])
    if not np.isfinite(span) or span <= 0:
        raise RecordingError(
            origin, f"{what} do not increase (first {t[0]:.9g} s, last {t[-1]:.9g} s)",
            "export times in increasing order, one per sample",
        )
    dt = span / (t.size - 1)
    rounding_s = 0.5 * resolution_s
    if resolution_s > 0:
        steps = dt / resolution_s
        if round(steps) >= 1 and abs(steps - round(steps)) < 1e-3:
            rounding_s = 0.0  # the interval is a whole number of printed steps: times are exact
    tolerance = max(RELATIVE_TOLERANCE * dt, rounding_s)
    if tolerance >= 0.5 * dt:
        raise RecordingError(
            origin, f"{what} are written too coarsely ({resolution_s:g} s steps) to show a "
            f"{dt * 1e3:.4g} ms sample interval",
            "export the times with more decimals",
        )
    step = np.diff(t)
    if np.any(step <= 0):
        i = int(np.argmax(step <= 0)) + 1
        raise RecordingError(
            origin, f"{what} do not increase at {where(i)} ({t[i - 1]:.9g} s then {t[i]:.9g} s)",
            "export one recording with one time per sample; Upstroke reads one sweep per text file",
        )
    # Local check first, so that a gap is reported where it is, then the drift of the whole grid.
    typical = float(np.median(step))
    jumps = np.abs(step - typical) > 2 * tolerance * (1 + 1e-9)
    if jumps.any():
        i = int(np.argmax(jumps))
        raise RecordingError(
            origin, f"sampling is irregular: {what} step by {step[i] * 1e3:.6g} ms at "
            f"{where(i + 1)} where the sample interval is {typical * 1e3:.6g} ms (tolerance "
            f"{RELATIVE_TOLERANCE:.0%} of the interval)",
            "Upstroke needs evenly sampled data without gaps; export the original samples or "
            "resample them evenly",
        )
    grid = t[0] + dt * np.arange(t.size)
    deviation = np.abs(t - grid)
    worst = float(deviation.max())
    if worst > tolerance * (1 + 1e-9):
        i = int(np.argmax(deviation > tolerance * (1 + 1e-9)))
        raise RecordingError(
            origin, f"sampling is irregular: {what} stray from an even {dt * 1e3:.6g} ms grid by "
            f"up to {worst * 1e3:.6g} ms, first at {where(i)} (tolerance "
            f"{RELATIVE_TOLERANCE:.0%} of the interval)",
            "Upstroke needs evenly sampled data; export the original samples or resample them evenly",
        )
    return check_rate(
        float((t.size - 1) / span), origin, what=f"the sampling rate of {what}",
        fix="check the units of the times (s, ms or us) or export the original samples",
    )
