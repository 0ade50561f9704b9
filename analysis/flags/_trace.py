"""The trace-based events (EAD, DAD, clipping, diastolic noise), worked in chunks of beats.

The definitions are those of :mod:`analysis.flags._events`. Sweeps are read through a *sweep source*:
anything with ``n_samples(sweep)`` and ``read(sweep, start, stop)``. :class:`ArraySweeps` wraps
arrays already in memory; :class:`RecordingSweeps` reads a recording's channel in windows (scaled
to mV and, when asked, preprocessed with filter context on both sides), so that an hour-long
gap-free sweep is never held whole: memory is bounded by ``chunk_s`` of samples. Every window is
read with enough margin that the moving averages equal those of the whole sweep, so the result
does not depend on the chunking.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

import numpy as np

from analysis.beats import (
    bridge_spans,
    estimate_noise_mV,
    find_spikes,
    residual_rms_many,
)
from analysis.chunkpool import run_ordered
from analysis.settings import DetectionSettings
from analysis.signal import filter_pad_samples, hum_survey, noise_rms_mV, preprocess
from analysis.table import BeatTable

__all__ = ["ArraySweeps", "RecordingSweeps", "as_sweeps", "box_mean", "sweep_trace_events"]


class ArraySweeps:
    """A sweep source over arrays in memory: ``arrays[sweep]`` is one sweep's samples."""

    def __init__(self, arrays: Sequence[np.ndarray] | Mapping[int, np.ndarray]) -> None:
        self._arrays = arrays

    def n_samples(self, sweep: int) -> int:
        return len(self._arrays[sweep])

    def read(self, sweep: int, start: int, stop: int) -> np.ndarray:
        return np.asarray(self._arrays[sweep][start:stop], dtype=np.float64)


class RecordingSweeps:
    """A sweep source reading one channel of a recording in windows.

    Parameters
    ----------
    recording : Recording
    channel : int
    scale : float
        Factor to mV (1 for a channel in mV).
    preprocess : PreprocessSettings or None
        When given, each window gets the LJP correction and filters of
        :func:`analysis.signal.preprocess`, computed with filter context on both sides.
    subtract_mV : float
        A constant taken off every sample (an LJP correction without filters).
    hum_surveys : dict of int to HumSurvey, optional
        Each sweep's hum as the analysis judged it (:func:`analysis.signal.hum_survey`); by default
        each sweep is surveyed on first read.
    """

    def __init__(
        self, recording: Any, channel: int, *, scale: float = 1.0, preprocess: Any = None, subtract_mV: float = 0.0,
        hum_surveys: Mapping[int, Any] | None = None,
    ) -> None:
        self._rec, self._ch, self._scale, self._pre = recording, int(channel), float(scale), preprocess
        self._subtract = float(subtract_mV)
        self._surveys: dict[int, Any] = dict(hum_surveys or {})
        self._pad = filter_pad_samples(recording.sampling_rate_hz, preprocess) if preprocess is not None else 0
        #: The converter's lowest and highest value in the units read, when the reader knows it
        #: and the samples are read as recorded (the clipping test's limits); else None.
        self.adc_range = None
        ranges = recording.metadata.get("adc_range")
        if ranges and preprocess is None and not subtract_mV and self._ch < len(ranges):
            lo, hi = ranges[self._ch]
            self.adc_range = (float(lo) * self._scale, float(hi) * self._scale) if self._scale != 1.0 else (float(lo), float(hi))

    def n_samples(self, sweep: int) -> int:
        return self._rec.n_samples(sweep)

    def _hum(self, sweep: int):
        """The sweep's hum, judged once on the whole sweep as the analysis judged it."""
        if getattr(self._pre, "hum_removal", "off") == "off":
            return False
        if sweep not in self._surveys:
            def raw(a: int, b: int) -> np.ndarray:
                x = self._rec.sweep(sweep, self._ch, a, b)
                return x * self._scale if self._scale != 1.0 else x

            self._surveys[sweep] = hum_survey(
                None, self._rec.sampling_rate_hz, n=self._rec.n_samples(sweep), load=raw,
                block_s=self._pre.hum_block_s, min_mV=self._pre.hum_min_mV,
            ) or False
        return self._surveys[sweep]

    def read(self, sweep: int, start: int, stop: int) -> np.ndarray:
        n = self._rec.n_samples(sweep)
        a, b = max(0, start - self._pad), min(n, stop + self._pad)
        x = self._rec.sweep(sweep, self._ch, a, b)
        if self._scale != 1.0:
            x = x * self._scale
        if self._pre is not None:
            x = preprocess(x, self._rec.sampling_rate_hz, self._pre, offset=a, hum=self._hum(sweep))
        if self._subtract:
            x = x - self._subtract
        return x[start - a:stop - a]


def as_sweeps(source: Any) -> Any:
    """A sweep source from a source, a sequence or mapping of arrays, or None."""
    if source is None or (hasattr(source, "n_samples") and hasattr(source, "read")):
        return source
    return ArraySweeps(source)


#: A time this close (in samples) below halfway between two samples counts as halfway.
_HALF_SAMPLE_SLACK = 1e-6


def _index(t_s: np.ndarray, fs_hz: float, n: int) -> np.ndarray:
    """Sample indices of times (NaN -> -1), clipped into the sweep.

    Each time goes to the nearest sample, and a time halfway between two samples to the later
    one. Halfway times are common (the vertex between two equal samples of a quantised trace),
    and the same time carries different rounding errors when measured from different chunks of
    the sweep: up to ``_HALF_SAMPLE_SLACK`` of a sample below halfway still goes to the later
    sample, so those errors cannot move a beat's window by one sample.
    """
    out = np.full(t_s.shape, -1, dtype=np.int64)
    ok = np.isfinite(t_s)
    out[ok] = np.clip(np.floor(t_s[ok] * fs_hz + (0.5 + _HALF_SAMPLE_SLACK)).astype(np.int64), 0, n - 1)
    return out


#: How far beside a flat run its flanks are looked at (a longer run is judged on this much).
_CUT_REACH_S = 0.005


def _is_cut(x: np.ndarray, s: int, e: int, value: float, top: bool, h: int) -> bool:
    """Whether a flat run ``x[s:e]`` at the sweep's extreme cuts the signal off (not a smooth top).

    A smooth top read through a converter of step q holds a run of equal samples too, but
    within as many samples again on either side (``h``, at most 5 ms) it falls only about 8 q (a
    parabola's top), and a smooth, noise-free diastole settling onto its level hardly moves
    there; a signal cut off at a height H above the flat falls about 8 H there. The run is a
    cut when both sides fall by more than 40 steps (a cut of more than 5 steps) and 6 x the
    noise.
    """
    left, right = x[max(0, s - h):s], x[e:e + h]
    if left.size == 0 or right.size == 0:
        return False  # at the sweep's edge: no flank to judge by
    sign = 1.0 if top else -1.0
    depth = min(sign * (value - float(np.min(left) if top else np.max(left))),
                sign * (value - float(np.min(right) if top else np.max(right))))
    around = x[max(0, s - 4 * h):min(x.size, e + 4 * h)]
    steps = np.abs(np.diff(around))
    steps = steps[steps > 0]
    q = float(np.min(steps)) if steps.size else 0.0

    flanks = np.concatenate((x[max(0, s - 4 * h):s], x[e:e + 4 * h]))
    return depth > max(40.0 * q, 6.0 * noise_rms_mV(flanks))


def _clipped_runs(
    raw: Any, sweep: int, n: int, min_len: int, block: int, fs_hz: float, adc_range: Sequence[float] | None = None,
) -> list[tuple[int, int, float]]:
    """Runs ``(start, stop, value)`` of at least ``min_len`` equal samples flat at a limit.

    When the reader knows the converter's range (``adc_range``, the lowest and highest value it
    can give), only runs at those limits are clipping. Otherwise a run of equal samples at the
    sweep's highest or lowest value counts where it cuts the signal off (:func:`_is_cut`), so
    that a smooth quantised top, or a noise-free flat diastole, is not taken for clipping.
    """
    runs: list[tuple[int, int, float]] = []
    known = adc_range is not None and len(adc_range) == 2 and all(map(math.isfinite, adc_range))
    if known:
        # Only the converter's own limits count (one pass: no need for the sweep's extremes).
        lo, hi = float(adc_range[0]), float(adc_range[1])
        tol = 1e-9 * max(abs(hi - lo), 1.0)
    else:
        hi, lo = -math.inf, math.inf
        for a in range(0, n, block):
            x = raw.read(sweep, a, min(n, a + block))
            if x.size:
                hi, lo = max(hi, float(np.max(x))), min(lo, float(np.min(x)))
        if not (math.isfinite(hi) and math.isfinite(lo)):
            return runs
        tol = 0.0
    open_at: dict[float, int | None] = {hi: None, lo: None}
    for a in range(0, n, block):
        x = raw.read(sweep, a, min(n, a + block))
        if not any(v is not None for v in open_at.values()) and not (
            np.max(x) >= hi - tol or np.min(x) <= lo + tol
        ):
            continue  # nothing at either extreme in this block, and no run going on
        for value in open_at:
            at = (np.abs(x - value) <= tol).view(np.int8)
            edges = np.diff(np.concatenate(([0], at, [0])))
            starts = list(np.flatnonzero(edges == 1) + a)
            stops = list(np.flatnonzero(edges == -1) + a)
            if open_at[value] is not None:
                if starts and starts[0] == a:
                    starts[0] = open_at[value]  # the run goes on from the previous block
                else:
                    starts.insert(0, open_at[value])
                    stops.insert(0, a)
            open_at[value] = None
            if stops and stops[-1] == a + x.size and a + x.size < n:
                open_at[value] = starts.pop()
                stops.pop()
            runs.extend((int(s), int(e), value) for s, e in zip(starts, stops) if e - s >= min_len)
    for value, s in open_at.items():
        if s is not None and n - s >= min_len:
            runs.append((int(s), n, value))
    runs = sorted(set(runs))
    if known:
        return runs
    out = []
    reach = max(3, int(round(_CUT_REACH_S * fs_hz)))
    for s, e, value in runs:
        h = min(max(e - s, 3), reach)
        a = max(0, s - 4 * h)
        x = raw.read(sweep, a, min(n, e + 4 * h))
        if _is_cut(x, s - a, e - a, value, value == hi, h):
            out.append((s, e, value))
    return out


def box_mean(x: np.ndarray, width: int) -> np.ndarray:
    """Moving average over ``width`` samples, the window ``[i - width // 2, i - width // 2 + width)``,
    the ends extended with the first and last sample (the same numbers as scipy.ndimage's
    ``uniform_filter1d(x, width, mode="nearest")``), from one running sum."""
    x = np.asarray(x, dtype=np.float64)
    if width <= 1 or x.size == 0:
        return x
    left = width // 2
    right = width - left - 1
    ref = float(x[0])
    padded = np.concatenate((np.full(left, x[0] - ref), x - ref, np.full(right, x[-1] - ref)))
    c = np.empty(padded.size + 1)
    c[0] = 0.0
    np.cumsum(padded, out=c[1:])
    return (c[width:] - c[:-width]) * (1.0 / width) + ref


def sweep_trace_events(
    source: Any,
    sweep: int,
    fs_hz: float,
    beats: BeatTable,
    quality: Any,
    *,
    raw: Any = None,
    chunk_s: float = 30.0,
    detection: Any = None,
    spikes: np.ndarray | None = None,
) -> dict[str, np.ndarray]:
    """EAD, DAD, clipping and diastolic noise for the beats of one sweep.

    Parameters
    ----------
    source
        The sweep source of the membrane potential in mV after LJP correction (and filters).
    sweep : int
    fs_hz : float
    beats : BeatTable
        The beats of this sweep only, in time order, with ``t_upstroke_s``, ``t_mdp_s``,
        ``t_top_s``, ``t_peak_s``, ``t_apd90_s``, ``peak_mV`` and ``apa_mV``.
    quality
        The quality settings section.
    raw
        The sweep source of the samples as recorded, for the clipping test (None: ``source``).
    chunk_s : float
        Beats are worked in windows of about this length (bounds memory).
    detection : DetectionSettings or None
        Whose spike rule (:func:`analysis.beats.find_spikes`; None: the defaults) marks the
        electrical spikes that are bridged before EADs and DADs are looked for, as detection
        bridges them: a spike is no afterdepolarisation. The diastolic noise keeps them, so
        that a spike in a diastole flags its beat ``noisy`` for review.
    spikes : ndarray or None
        The sweep's spike spans, ``(start, stop)`` rows, when already found (detection's);
        None finds them by the ``detection`` rule.

    Returns
    -------
    dict of str to ndarray
        Boolean ``ead``, ``dad``, ``clipped``, ``noisy``; float ``ead_mV``, ``ead_takeoff_mV``,
        ``dad_mV``, ``noise_mV_rms`` (NaN where none or not assessable); text ``clip_detail``.
    """
    k = len(beats)
    out: dict[str, np.ndarray] = {
        "ead": np.zeros(k, bool), "dad": np.zeros(k, bool), "clipped": np.zeros(k, bool),
        "noisy": np.zeros(k, bool), "ead_mV": np.full(k, np.nan), "ead_takeoff_mV": np.full(k, np.nan),
        "dad_mV": np.full(k, np.nan), "noise_mV_rms": np.full(k, np.nan),
        "clip_detail": np.full(k, "", dtype=object),
    }
    n = source.n_samples(sweep)
    if k == 0 or n == 0:
        return out
    i_up = _index(np.asarray(beats["t_upstroke_s"], float), fs_hz, n)
    i_peak = _index(np.asarray(beats["t_peak_s"], float), fs_hz, n)
    i_apd90 = _index(np.asarray(beats["t_apd90_s"], float), fs_hz, n)
    i_mdp = _index(np.asarray(beats["t_mdp_s"], float), fs_hz, n)
    i_top = _index(np.asarray(beats["t_top_s"], float), fs_hz, n)
    peak = np.asarray(beats["peak_mV"], float)
    apa = np.asarray(beats["apa_mV"], float)
    w_ead = max(1, int(round(quality.ead_smooth_ms * 1e-3 * fs_hz)))
    w_dad = max(1, int(round(quality.dad_smooth_ms * 1e-3 * fs_hz)))
    # Phase 4 lies well below the noise corner; hum (50/60 Hz) and white noise lie above it.
    corner_hz = min(quality.noise_highpass_hz, 0.4 * fs_hz)
    pad = int(round(fs_hz / corner_hz))

    # The samples each beat needs: from its MDP (or upstroke) to the next take-off (or sweep end).
    first = np.where(i_mdp >= 0, i_mdp, i_up)
    last = np.empty(k, np.int64)
    last[:-1] = np.maximum(i_top[1:], i_up[1:])
    last[-1] = n - 1
    last = np.maximum(last, np.maximum(i_apd90, i_up))
    # EADs and DADs are looked for on means of blocks of an eighth of the EAD window (aligned to
    # the sweep's start): the moving averages of V over both windows are smooth at that scale,
    # and the work shrinks by the block length.
    d = max(1, w_ead // 8)
    m_ead, m_dad = max(1, int(round(w_ead / d))), max(1, int(round(w_dad / d)))
    margin = w_ead // 2 + w_dad // 2 + 2 + 2 * d
    spike_rule = detection if detection is not None else DetectionSettings()
    known = None if spikes is None else np.asarray(spikes, np.int64).reshape(-1, 2)
    spike_noise = estimate_noise_mV(lambda lo, hi: source.read(sweep, lo, hi), n) if known is None else 0.0
    # A spike is judged on the samples around it: the margin lets every window see it whole.
    margin += int(math.ceil((spike_rule.spike_max_ms + 2 * spike_rule.spike_guard_ms) * 1e-3 * fs_hz)) + 4
    chunk = max(int(chunk_s * fs_hz), 1)
    windows = []  # (first beat, beat after the last) of each window
    b0 = 0
    while b0 < k:
        b1 = b0 + 1
        while b1 < k and last[b1] - first[b0] <= chunk:
            b1 += 1
        windows.append((b0, b1))
        b0 = b1

    def window(i: int) -> dict[str, np.ndarray]:
        # What the window finds for its own beats (the windows may be worked in other
        # processes: analysis.chunkpool).
        b0, b1 = windows[i]
        a = max(0, int(first[b0:b1].min()) - margin)
        a -= a % d
        z = min(n, int(last[b0:b1].max()) + margin + 1)
        v = source.read(sweep, a, z)
        if known is None:
            found = find_spikes(v, fs_hz, noise_mV=spike_noise, settings=spike_rule)
        else:
            found = known[(known[:, 0] > a) & (known[:, 1] < z - 1)] - a
        vb = bridge_spans(v, found) if found.size else v
        nb = vb.size // d
        blocks = np.einsum("ij->i", vb[:nb * d].reshape(nb, d)) * (1.0 / d) if d > 1 else vb
        vs = box_mean(blocks, m_ead)
        dvdt = np.gradient(vs) * (fs_hz / d) * 1e-3 if vs.size > 1 else np.zeros_like(vs)  # V/s
        vd = box_mean(blocks, m_dad)
        coarse = _Coarse(a, d)
        for b in range(b0, b1):
            _ead(b, coarse, vb, vs, dvdt, i_peak, i_apd90, peak, apa, w_ead, quality, out)
            _dad(b, coarse, vd, i_apd90, i_top, i_up, k, n, w_dad, quality, out)
        # The diastoles' noise, all of this window's at once (unbridged: a spike there counts).
        rows = np.arange(b0, b1)
        rows = rows[(i_mdp[rows] >= 0) & (i_top[rows] - i_mdp[rows] + 1 >= 2 * pad)]
        if rows.size:
            out["noise_mV_rms"][rows] = residual_rms_many(v, i_mdp[rows] - a, i_top[rows] - a + 1, fs_hz, corner_hz)
        return {name: values[b0:b1] for name, values in out.items()}

    for (b0, b1), found_here in zip(windows, run_ordered(window, len(windows))):
        for name, values in found_here.items():
            out[name][b0:b1] = values
    with np.errstate(invalid="ignore"):
        out["noisy"] = np.isfinite(out["noise_mV_rms"]) & (out["noise_mV_rms"] > quality.noise_max_mV_rms)

    # Clipping: each beat owns the samples from its MDP (the sweep start for the first beat) to
    # the next beat's MDP, so every flat run belongs to exactly one beat.
    min_len = max(int(getattr(quality, "clip_min_samples", 3)), int(math.ceil(quality.clip_min_flat_ms * 1e-3 * fs_hz)))
    clip_source = raw if raw is not None else source
    runs = _clipped_runs(clip_source, sweep, n, min_len, chunk, fs_hz, getattr(clip_source, "adc_range", None))
    if runs:
        owner = np.where(i_mdp >= 0, i_mdp, np.maximum(i_up - 1, 0))
        owner[0] = 0
        owner = np.maximum.accumulate(owner)
        for start, stop, value in runs:
            b = min(max(int(np.searchsorted(owner, start, side="right") - 1), 0), k - 1)
            if not out["clipped"][b]:
                out["clipped"][b] = True
                out["clip_detail"][b] = f"flat at {value:.4g} for {1e3 * (stop - start) / fs_hz:.3g} ms"
    return out


class _Coarse:
    """Block ``J`` of the block means holds the samples ``[a + J d, a + J d + d)``."""

    def __init__(self, a: int, d: int) -> None:
        self.a, self.d = a, d

    def first_at_or_after(self, i: int) -> int:
        return -(-(i - self.a) // self.d)

    def last_at_or_before(self, i: int) -> int:
        return (i - self.a + 1) // self.d - 1


def _ead(b, coarse, v, vs, dvdt, i_peak, i_apd90, peak, apa, width, quality, out) -> None:
    """The climb above the running minimum of the repolarising trace, from the set level to APD90."""
    if not (i_peak[b] >= 0 and i_apd90[b] > i_peak[b] and math.isfinite(apa[b])):
        return
    a = coarse.a
    level = peak[b] - quality.ead_start_repol_pct / 100.0 * apa[b]
    # The crossing is taken on the unsmoothed trace, and the search starts only where the
    # smoothing window no longer reaches back into the upstroke.
    below = np.flatnonzero(v[i_peak[b] - a:i_apd90[b] - a + 1] <= level)
    if not below.size:
        return
    s0 = coarse.first_at_or_after(max(i_peak[b] + int(below[0]), i_peak[b] + width // 2 + 1))
    s1 = min(coarse.last_at_or_before(int(i_apd90[b])), vs.size - 1)
    if s0 >= s1:
        return
    seg = vs[s0:s1 + 1]
    floor = np.minimum.accumulate(seg)
    rise = seg - floor
    j = int(np.argmax(rise))
    if rise[j] < quality.ead_min_mV:
        return
    start = int(np.flatnonzero(seg[: j + 1] == floor[j])[-1])
    if np.max(dvdt[s0 + start:s0 + j + 1]) >= quality.ead_min_dvdt_V_per_s:
        out["ead"][b] = True
        out["ead_mV"][b] = float(rise[j])
        out["ead_takeoff_mV"][b] = float(seg[start])


def _dad(b, coarse, vd, i_apd90, i_top, i_up, k, n, width, quality, out) -> None:
    """A hump that rises and falls back by ``dad_min_mV`` between APD90 and the next take-off."""
    if i_apd90[b] < 0:
        return
    s0 = i_apd90[b]
    if b + 1 < k:
        stop = i_top[b + 1] if i_top[b + 1] > s0 else i_up[b + 1] - width
        # Keep the smoothing window from reaching into the next upstroke.
        stop = min(stop, i_up[b + 1] - width // 2 - 1)
    else:
        stop = n - 1
    if stop - s0 <= 2:
        return
    j0, j1 = coarse.first_at_or_after(int(s0)), min(coarse.last_at_or_before(int(stop)), vd.size - 1)
    if j1 - j0 < 1:
        return
    seg = vd[j0:j1 + 1]
    rise = seg - np.minimum.accumulate(seg)
    fall = seg - np.minimum.accumulate(seg[::-1])[::-1]
    hump = np.minimum(rise, fall)
    j = int(np.argmax(hump))
    if hump[j] >= quality.dad_min_mV:
        out["dad"][b] = True
        out["dad_mV"][b] = float(hump[j])
