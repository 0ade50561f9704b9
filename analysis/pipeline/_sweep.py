"""One sweep of a recording, detected and measured chunk by chunk through its loader.

The samples are read twice, once to find the beats (:func:`analysis.beats.detect_sweep`) and once
to measure them in groups of beats (:class:`_Measurer`); when the quality rules reject
artefact-like detections, their neighbours are measured again with the real beats around them.
"""

from __future__ import annotations

import numpy as np

from analysis.beats import (
    bridge_spans,
    detect_sweep,
    estimate_noise_mV,
    features_of_sweep,
    marker_columns,
    measure_beats,
)
from analysis.chunkpool import run_ordered
from analysis.flags import artefact_like
from analysis.recording import Recording
from analysis.settings import Settings
from analysis.signal import filter_pad_samples, hum_survey, preprocess

__all__ = ["MEASURING_QUALITY_FIELDS", "analyse_sweep"]


def _loader(recording: Recording, sw: int, ch: int, scale: float, s: Settings):
    """``load(start, stop)``: preprocessed samples of one sweep (hum judged once per sweep)."""
    fs = recording.sampling_rate_hz

    def raw(a: int, b: int) -> np.ndarray:
        x = recording.sweep(sw, ch, a, b)
        return x * scale if scale != 1.0 else x

    hum = False
    if s.preprocess.hum_removal != "off":
        hum = hum_survey(None, fs, n=recording.n_samples(sw), load=raw, block_s=s.preprocess.hum_block_s,
                         min_mV=s.preprocess.hum_min_mV) or False

    def load(a: int, b: int) -> np.ndarray:
        return preprocess(raw(a, b), fs, s.preprocess, offset=a, hum=hum)

    load.hum = hum  # type: ignore[attr-defined]
    return load


def analyse_sweep(recording, sw, ch, scale, s: Settings, tick, detection=None):
    """Detect (unless ``detection``, an earlier :func:`detect_sweep` result under the same
    preprocess and detection settings, is given) and measure the beats of one sweep.

    Returns (columns or None, artefacts, rise samples, hum survey, spike spans, detection)."""
    fs = recording.sampling_rate_hz
    n = recording.n_samples(sw)
    load = _loader(recording, sw, ch, scale, s)
    pad = filter_pad_samples(fs, s.preprocess)
    noise = estimate_noise_mV(load, n)
    sent = [0]  # samples of this sweep reported so far for detection

    def detected(done: int, total: int) -> None:
        now = n * done // total if total else n
        tick(now - sent[0])
        sent[0] = now

    det = detection
    if det is None:
        det = detect_sweep(load, n, fs, settings=s.detection, noise_mV=noise, pad=pad, progress=detected)
    tick(n - sent[0])
    art = (det.i_artefact, det.artefact_reason)
    ups = det.i_upstroke
    if ups.size == 0:
        tick(n)
        return None, art, [], load.hum, det.spike_spans, det
    measure = _Measurer(load, n, fs, s, noise, pad, det.spike_spans)
    prev = np.concatenate(([-1], ups[:-1]))
    nxt = np.concatenate((ups[1:], [n]))
    merged = measure(ups, prev, nxt, tick)
    previous_row = np.arange(ups.size) - 1
    chained = _chain_without_artefacts(merged, s)
    if chained is not None:
        # Artefact-like detections are not beats: their neighbours are measured again with the
        # real beats around them as previous and next (CL, MDP, take-off, APD search limits).
        previous_row, next_row, redo, bridges = chained
        prev2 = np.where(previous_row[redo] >= 0, ups[np.maximum(previous_row[redo], 0)], -1)
        nxt2 = np.where(next_row[redo] < ups.size, ups[np.minimum(next_row[redo], ups.size - 1)], n)
        measure.bridges = bridges
        again = measure(ups[redo], prev2, nxt2, None)
        for name, values in again.items():
            merged[name][redo] = values
    merged["previous_row"] = previous_row
    cols = _sweep_columns(merged, sw, s)
    rise = [float(x) for x in merged["rise_samples"]]
    return cols, art, rise, load.hum, det.spike_spans, det


class _Measurer:
    """Measures beats of one sweep in chunks read through its loader (spikes bridged first)."""

    def __init__(self, load, n: int, fs: float, s: Settings, noise: float, pad: int, spikes: np.ndarray) -> None:
        self.load, self.n, self.fs, self.s, self.noise = load, n, fs, s, noise
        #: The sweep's spike spans, as detection found and bridged them.
        self.spikes = np.asarray(spikes, np.int64).reshape(-1, 2)
        self.chunk = max(int(s.detection.chunk_s * fs), 1)
        self.margin = pad + int(0.25 * fs) + 64
        #: Extra ``(start, stop)`` sweep spans bridged like spikes (short artefact detections).
        self.bridges = np.empty((0, 2), np.int64)

    def __call__(self, ups: np.ndarray, prev: np.ndarray, nxt: np.ndarray, tick) -> dict[str, np.ndarray]:
        """Marker columns of beats ``ups`` (sweep indices, in order) with the given previous
        (-1: none) and next (``n``: none) upstrokes."""
        groups = []  # (first beat, beat after the last) of each chunk
        k0 = 0
        while k0 < ups.size:
            start_at = int(prev[k0]) if prev[k0] >= 0 else int(ups[k0])
            k1 = k0 + 1
            while k1 < ups.size and max(nxt[k1], ups[k1]) - start_at < self.chunk and prev[k1] >= start_at:
                k1 += 1
            groups.append((k0, k1))
            k0 = k1
        done_to = [0]

        def advanced(i: int, _result) -> None:
            stop_at = int(nxt[groups[i][1] - 1])
            if tick is not None:
                tick(max(0, stop_at - done_to[0]))
            done_to[0] = max(done_to[0], stop_at)

        parts = run_ordered(lambda i: self._chunk(ups, prev, nxt, *groups[i]), len(groups), advanced)
        if not parts:
            return {}
        out = {name: np.concatenate([c[name] for c, _ in parts]) for name in parts[0][0]}
        out["flags"] = np.array([f for _, fl in parts for f in fl], dtype=object)
        return out

    def _chunk(self, ups: np.ndarray, prev: np.ndarray, nxt: np.ndarray, k0: int, k1: int):
        """(marker columns, flags) of beats ``k0:k1``, read as one stretch with context."""
        n, fs, s = self.n, self.fs, self.s
        # A sweep's first beat reads from the sweep's start: the diastole recorded before it.
        start_at = int(prev[k0]) if prev[k0] >= 0 else 0
        stop_at = int(nxt[k1 - 1])
        ra, rb = max(0, int(start_at) - self.margin), min(n, stop_at + self.margin)
        v = self.load(ra, rb)
        # Short electrical spikes are bridged before anything is measured, as detection
        # bridged them (MEASUREMENTS.md, Beats: a spike of a few samples is neither a beat
        # nor part of one), and so are short artefact detections when their neighbours are
        # measured again.
        sp = np.concatenate((self.spikes, self.bridges))
        sp = sp[(sp[:, 0] > ra) & (sp[:, 1] < rb - 1)] - ra
        if sp.size:
            v = bridge_spans(v, sp[np.argsort(sp[:, 0], kind="stable")])
        p = np.where(prev[k0:k1] >= 0, prev[k0:k1] - ra, -1)
        q = np.where(nxt[k0:k1] < n, nxt[k0:k1] - ra, rb - ra)
        m = measure_beats(
            v, fs, ups[k0:k1] - ra, i_previous=p, i_next=q, settings=s.measurement, noise_mV=self.noise,
            sweep_end=(rb == n), offset=ra,
        )
        return m.columns(), [";".join(f) for f in m.flags]


#: The quality settings the measurement itself reads (:func:`_chain_without_artefacts`): a change
#: of any of them measures the beats again, where other quality settings re-run only the events.
MEASURING_QUALITY_FIELDS = ("reject_artefact", "artefact_max_dvdt_V_per_s", "artefact_min_apd90_ms")


def _chain_without_artefacts(merged: dict[str, np.ndarray], s: Settings):
    """Rows of the previous and next real beat, and the beats to measure again, or None.

    Only when the quality rules reject artefact-like detections (``quality.reject_artefact``):
    such a detection is not a beat, so the beat after it takes its cycle length and MDP from the
    real beat before it, and the beat before it repolarises up to the next real beat.
    """
    quality = getattr(s, "quality", None)
    if quality is None or not getattr(quality, "reject_artefact", False):
        return None

    feats = features_of_sweep(merged, s.measurement)
    bad = artefact_like(feats["dvdt_max_V_per_s"], feats["apd90_ms"], quality)[0]
    if not bad.any():
        return None
    k = bad.size
    rows = np.arange(k)
    real = np.where(~bad, rows, -1)
    previous_row = np.concatenate(([-1], np.maximum.accumulate(real)[:-1]))
    real_next = np.where(~bad, rows, k)
    next_row = np.concatenate((np.minimum.accumulate(real_next[::-1])[::-1][1:], [k]))
    redo = np.flatnonzero(~bad & ((previous_row != rows - 1) | (next_row != rows + 1)))
    # A short artefact's own samples (from its take-off to as far again after its APD90) are
    # bridged when its neighbours are measured again, so that it is not in their phase 4 either.
    fs = 1.0 / np.nanmedian(np.diff(merged["t_upstroke_s"]) / np.diff(merged["i_upstroke"])) if k > 1 else 1.0
    bridges = []
    for i in np.flatnonzero(bad & (feats["apd90_ms"] < s.quality.artefact_min_apd90_ms)):
        t_up, t_end = merged["t_upstroke_s"][i], merged["t_apd90_s"][i]
        t_start = merged["t_top_s"][i] if np.isfinite(merged["t_top_s"][i]) else t_up - 0.005
        if np.isfinite(t_end) and np.isfinite(t_start):
            bridges.append((int(np.floor(t_start * fs)), int(np.ceil((2 * t_end - t_up) * fs)) + 1))
    return previous_row, next_row, redo, np.asarray(bridges, np.int64).reshape(-1, 2)


def _sweep_columns(merged: dict[str, np.ndarray], sw: int, s: Settings) -> dict[str, np.ndarray]:
    feats = features_of_sweep(merged, s.measurement)
    k = len(merged["i_upstroke"])
    cols: dict[str, np.ndarray] = {
        "sweep": np.full(k, sw, np.int64),
        "beat": np.arange(k, dtype=np.int64),
        "accepted": np.ones(k, np.int64),
        "flags": merged["flags"],
        "condition": np.array([""] * k, dtype=object),
    }
    cols.update(feats)
    for name in marker_columns(s.measurement.apd_percent):
        cols[name] = merged[name]
    cols["reject_reason"] = np.array([""] * k, dtype=object)
    return cols
