"""Samples for drawing one sweep at any zoom, without holding the whole sweep as floats.

A gap-free recording can be an hour at 50 kHz. Drawing it must not cost converting every sample
to float on open, nor a min/max over every sample on every frame. :class:`SweepLevels` hands the
trace view either the raw samples around what is visible (pyqtgraph then clips them to the view
and peak-downsamples them to the pixels) or, zoomed out, a precomputed min/max envelope whose
bins are finer than a pixel, so the curve looks the same as the raw samples would.

This is drawing, not measuring: nothing here is a physiological value. Qt-free, so it can be
tested and benchmarked without a display.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from typing import Callable

import numpy as np

from analysis.recording import Recording

__all__ = ["SweepLevels", "DrawData", "envelope_of", "recording_envelope"]

#: Samples per bin of the finest envelope level, and the factor between levels.
BIN_SAMPLES = 64
LEVEL_FACTOR = 8
#: Samples read per block while building the envelope (bounds memory by a block).
BLOCK_SAMPLES = 1 << 21


@dataclass(frozen=True)
class DrawData:
    """What the trace view draws for one view range.

    Attributes
    ----------
    x_s : ndarray
        Times from the start of the sweep, in seconds, increasing.
    y : ndarray
        Values in the channel's units.
    first_sample, stop_sample : int
        The span of sweep samples the arrays cover (stop excluded).
    bin_samples : int
        1 for raw samples, else the envelope's bin width (each bin gives a max and a min point).
    """

    x_s: np.ndarray
    y: np.ndarray
    first_sample: int
    stop_sample: int
    bin_samples: int

    def covers(self, i0: int, i1: int) -> bool:
        return self.first_sample <= i0 and i1 <= self.stop_sample


def envelope_of(samples: np.ndarray, bin_samples: int) -> tuple[np.ndarray, np.ndarray]:
    """Per-bin minimum and maximum of ``samples`` (the last bin may be short)."""
    n = len(samples)
    full = n // bin_samples
    body = samples[: full * bin_samples].reshape(full, bin_samples)
    lo, hi = body.min(axis=1), body.max(axis=1)
    if full * bin_samples < n:
        tail = samples[full * bin_samples :]
        lo = np.append(lo, tail.min())
        hi = np.append(hi, tail.max())
    return lo, hi


class SweepLevels:
    """Drawable samples of one sweep of one channel at every zoom.

    Parameters
    ----------
    recording : Recording
    sweep : int
    channel : int
    raw_limit : int
        Views spanning at most this many samples are drawn from raw samples; wider views from
        the envelope once it is built (:meth:`build_envelope`). The envelope's finest bins are
        :data:`BIN_SAMPLES` wide, so a wider view loses nothing a screen could show.
    raw_limit_unbuilt : int
        The same limit while the envelope is still being built (so the first view is exact).
    """

    def __init__(self, recording: Recording, sweep: int, channel: int, *, raw_limit: int = 200_000,
                 raw_limit_unbuilt: int = 4_000_000) -> None:
        self.recording = recording
        self.sweep = int(sweep)
        self.channel = int(channel)
        self.fs_hz = recording.sampling_rate_hz
        self.n_samples = recording.n_samples(sweep)
        self.raw_limit = int(raw_limit)
        self.raw_limit_unbuilt = max(int(raw_limit_unbuilt), self.raw_limit)
        # levels[k] = (lo, hi) with bins of BIN_SAMPLES * LEVEL_FACTOR**k samples
        self._levels: list[tuple[np.ndarray, np.ndarray]] = []
        self._lock = threading.Lock()

    @property
    def duration_s(self) -> float:
        return self.n_samples / self.fs_hz

    @property
    def envelope_ready(self) -> bool:
        return bool(self._levels)

    def build_envelope(
        self,
        *,
        progress: Callable[[float], None] | None = None,
        cancelled: Callable[[], bool] | None = None,
    ) -> bool:
        """Read the sweep block by block and build the min/max levels.

        Safe to call from a worker thread. Returns False when ``cancelled()`` stopped it.
        """
        los, his = [], []
        step = BLOCK_SAMPLES - BLOCK_SAMPLES % BIN_SAMPLES
        for start in range(0, self.n_samples, step):
            if cancelled is not None and cancelled():
                return False
            block = self.recording.sweep(self.sweep, self.channel, start=start, stop=start + step)
            lo, hi = envelope_of(block, BIN_SAMPLES)
            los.append(lo)
            his.append(hi)
            if progress is not None:
                progress(min(1.0, (start + step) / self.n_samples))
        levels = [(np.concatenate(los), np.concatenate(his))]
        while len(levels[-1][0]) > 4 * LEVEL_FACTOR:
            lo, hi = levels[-1]
            levels.append((envelope_of(lo, LEVEL_FACTOR)[0], envelope_of(hi, LEVEL_FACTOR)[1]))
        with self._lock:
            self._levels = levels
        return True

    def value_at(self, index: np.ndarray) -> np.ndarray:
        """The samples at given sample indices (for placing markers on the trace)."""
        idx = np.clip(np.asarray(index, dtype=np.int64), 0, self.n_samples - 1)
        out = np.empty(len(idx))
        for k, i in enumerate(idx):
            out[k] = self.recording.sweep(self.sweep, self.channel, start=int(i), stop=int(i) + 1)[0]
        return out

    def for_view(self, t0_s: float, t1_s: float, width_px: int) -> DrawData:
        """Data to draw a view from ``t0_s`` to ``t1_s`` seconds, ``width_px`` pixels wide.

        The data reach one view width beyond each side, so that panning by less than a view
        width is drawn from what is already loaded (pyqtgraph clips it to the view).
        """
        i0, i1 = self._span(t0_s, t1_s)
        span = max(1, i1 - i0)
        lo_i, hi_i = max(0, i0 - span), min(self.n_samples, i1 + span)
        bin_w = self._desired_bin(span, width_px)
        if bin_w == 1:
            y = self.recording.sweep(self.sweep, self.channel, start=lo_i, stop=hi_i)
            x = np.arange(lo_i, lo_i + len(y), dtype=np.float64) / self.fs_hz
            return DrawData(x, y, lo_i, lo_i + len(y), 1)
        if bin_w < 0:
            # The envelope is still being built: a coarse preview rather than a stalled view.
            return self._preview(lo_i, hi_i, width_px)
        return self._from_levels(lo_i, hi_i, bin_w)

    def needs_reload(self, current: DrawData | None, t0_s: float, t1_s: float, width_px: int) -> bool:
        """Whether what is drawn no longer serves the view (outside it, or the wrong level)."""
        if current is None:
            return True
        i0, i1 = self._span(t0_s, t1_s)
        if not current.covers(i0, i1):
            return True
        want = self._desired_bin(max(1, i1 - i0), width_px)
        if want < 0:
            return False  # keep the preview until the envelope is ready
        return want != current.bin_samples

    def coarse(self, n_bins: int) -> tuple[np.ndarray, np.ndarray]:
        """The whole sweep as about ``n_bins`` max/min pairs: ``(x_s, y)`` interleaved.

        Needs the envelope (:meth:`build_envelope`).
        """
        with self._lock:
            levels = list(self._levels)
        width = BIN_SAMPLES
        lo, hi = levels[0]
        for k in range(1, len(levels)):
            if len(levels[k][0]) < n_bins:
                break
            lo, hi = levels[k]
            width *= LEVEL_FACTOR
        factor = max(1, len(lo) // max(1, n_bins))
        if factor > 1:
            lo, hi = envelope_of(lo, factor)[0], envelope_of(hi, factor)[1]
            width *= factor
        centres = (np.arange(len(lo)) + 0.5) * width / self.fs_hz
        x = np.repeat(np.minimum(centres, self.duration_s), 2)
        y = np.empty(2 * len(lo))
        y[0::2], y[1::2] = hi, lo
        return x, y

    # -- internals ------------------------------------------------------------------------------
    def _span(self, t0_s: float, t1_s: float) -> tuple[int, int]:
        i0 = int(np.floor(min(t0_s, t1_s) * self.fs_hz))
        i1 = int(np.ceil(max(t0_s, t1_s) * self.fs_hz)) + 1
        return max(0, i0), min(self.n_samples, max(i1, 0))

    def _desired_bin(self, span: int, width_px: int) -> int:
        """1 for raw samples, a level's bin width, or -1 for a preview (envelope not ready)."""
        if span <= self.raw_limit:
            return 1
        if not self.envelope_ready:
            return 1 if span <= self.raw_limit_unbuilt else -1
        width = best = BIN_SAMPLES
        for _ in self._levels[1:]:
            width *= LEVEL_FACTOR
            # Coarsest level that still has at least two bins per pixel.
            if span / width >= 2 * max(width_px, 1000):
                best = width
        return best

    def _from_levels(self, lo_i: int, hi_i: int, bin_w: int) -> DrawData:
        k = int(round(np.log(bin_w / BIN_SAMPLES) / np.log(LEVEL_FACTOR)))
        with self._lock:
            lo, hi = self._levels[k]
        b0, b1 = lo_i // bin_w, min(len(lo), -(-hi_i // bin_w))
        n = b1 - b0
        x = np.empty(2 * n)
        x[0::2] = (np.arange(b0, b1) * bin_w + bin_w * 0.25) / self.fs_hz
        x[1::2] = (np.arange(b0, b1) * bin_w + bin_w * 0.75) / self.fs_hz
        y = np.empty(2 * n)
        y[0::2] = hi[b0:b1]
        y[1::2] = lo[b0:b1]
        return DrawData(x, y, b0 * bin_w, min(self.n_samples, b1 * bin_w), bin_w)

    def _preview(self, lo_i: int, hi_i: int, width_px: int) -> DrawData:
        """A strided min/max preview read in a few short stretches (before the envelope exists)."""
        n_bins = max(2 * width_px, 1000)
        edges = np.linspace(lo_i, hi_i, n_bins + 1).astype(np.int64)
        take = 32
        his, los = np.empty(n_bins), np.empty(n_bins)
        for k in range(n_bins):
            seg = self.recording.sweep(self.sweep, self.channel, start=int(edges[k]), stop=int(min(edges[k + 1], edges[k] + take)))
            his[k], los[k] = (seg.max(), seg.min()) if len(seg) else (np.nan, np.nan)
        x = np.repeat((edges[:-1] + edges[1:]) / 2.0 / self.fs_hz, 2)
        y = np.empty(2 * n_bins)
        y[0::2], y[1::2] = his, los
        return DrawData(x, y, lo_i, hi_i, -1)


def recording_envelope(
    levels: list[SweepLevels], sweep_starts_s: list[float], n_points: int = 6000
) -> tuple[np.ndarray, np.ndarray]:
    """The whole recording's envelope in recording time, NaN between sweeps.

    ``levels`` are the sweeps' :class:`SweepLevels` with their envelopes built; about
    ``n_points`` bins are shared out over the sweeps by duration.
    """
    total = sum(lv.duration_s for lv in levels) or 1.0
    xs, ys = [], []
    for lv, start in zip(levels, sweep_starts_s):
        n = max(4, int(n_points * lv.duration_s / total))
        x, y = lv.coarse(n)
        xs.extend([x + start, x[-1:] + start])  # a NaN sample breaks the line between sweeps
        ys.extend([y, [np.nan]])
    if not xs:
        return np.empty(0), np.empty(0)
    return np.concatenate(xs), np.concatenate(ys)
