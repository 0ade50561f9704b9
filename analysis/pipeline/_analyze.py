"""``analyze``: one recording in, the beats table out.

recording -> channel (current clamp only) -> per sweep: LJP correction and filters, chunked
detection, chunked measurement -> feature registry -> beat table -> events and quality rules
(:func:`flag_and_reject`, the one hook where :mod:`analysis.flags._events` works) -> result.

Memory is bounded by a chunk (``detection.chunk_s``), not by the recording: samples are read from
the recording's loader chunk by chunk, once to find the beats and once to measure them.
"""

from __future__ import annotations

import dataclasses
import math
import os
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from analysis.beats import (
    ARTEFACT_REASONS,
    apd_name,
    bridge_spans,
    detect_beats,
    detect_sweep,
    estimate_noise_mV,
    features_of_sweep,
    marker_columns,
    measure_beats,
)
from analysis.chunkpool import run_ordered, use_workers
from analysis.errors import RecordingError, SettingsError
from analysis import flags
from analysis.flags import artefact_like
from analysis.recording import CURRENT_CLAMP, VOLTAGE_CLAMP, Recording
from analysis.settings import Settings
from analysis.signal import filter_pad_samples, hum_survey, preprocess
from analysis.table import CSV_COLUMNS, BeatTable

__all__ = ["AnalysisResult", "analyze", "choose_channel", "flag_and_reject", "looks_like_membrane_potential"]

_TO_MV = {"mv": 1.0, "v": 1000.0, "uv": 1e-3, "µv": 1e-3}

#: ``progress(done, total)`` in samples worked (detection and measurement both count).
Progress = Callable[[int, int], None]


@dataclass
class AnalysisResult:
    """The beats of one recording and how they were obtained.

    Attributes
    ----------
    beats : BeatTable
        One row per beat: the beats CSV's columns, then marker times, ``i_upstroke`` and
        ``reject_reason``.
    warnings : list of str
        Notes for the user (channel chosen, sampling too slow for dV/dt max, sweeps without beats).
    channel : int
    channel_name : str
    settings : Settings
    recording : Recording
    ljp_mV : float
        The liquid-junction potential subtracted (V_true = V_measured - LJP).
    artefacts : dict of int to (ndarray, ndarray)
        Per sweep, the sample indices and reasons of detection candidates not taken as beats.
    hum_sweeps : list of int
        The sweeps from which mains hum was subtracted (``preprocess.hum_removal``).
    spikes : dict of int to ndarray
        Per sweep, the ``(start, stop)`` sample spans of short electrical spikes (guards
        included) that were bridged before measuring (:func:`analysis.beats.find_spikes`).
    """

    beats: BeatTable
    warnings: list[str]
    channel: int
    channel_name: str
    settings: Settings
    recording: Recording
    ljp_mV: float
    artefacts: dict = field(default_factory=dict)
    hum_sweeps: list = field(default_factory=list)
    spikes: dict = field(default_factory=dict)


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


def _sweep_list(recording: Recording, sweeps: Sequence[int] | None) -> list[int]:
    if sweeps is None:
        return list(range(recording.n_sweeps))
    out = []
    for s in sweeps:
        i = int(s)
        if not 0 <= i < recording.n_sweeps:
            raise RecordingError(
                recording.source_path, f"no sweep {i}",
                f"choose sweeps from 0 to {recording.n_sweeps - 1}",
            )
        out.append(i)
    return sorted(set(out))


def analyze(
    recording: Recording,
    settings: Settings | None = None,
    channel: int | str | None = None,
    sweeps: Sequence[int] | None = None,
    progress: Progress | None = None,
    *,
    label: str | None = None,
    workers: int | None = None,
) -> AnalysisResult:
    """Detect and measure every beat of a current-clamp recording.

    Parameters
    ----------
    recording : Recording
    settings : Settings or None
        None for the defaults (MEASUREMENTS.md).
    channel : int, str or None
        Channel index or name; None picks the current-clamp channel and says which in the
        warnings.
    sweeps : sequence of int or None
        Which sweeps (None: all).
    progress : callable or None
        ``progress(done, total)``, in samples worked.
    label : str or None
        The ``file`` column (default: the recording's file name, or ``"recording"``).
    workers : int or None
        Processes that share the chunks of a long sweep (:mod:`analysis.chunkpool`; the
        results are the same bytes whatever the number). None: the caller's context (one
        unless :func:`analysis.chunkpool.use_workers` says otherwise).

    Returns
    -------
    AnalysisResult

    Raises
    ------
    RecordingError
        For a voltage-clamp channel, a missing channel or sweep.

    Examples
    --------
    >>> import numpy as np
    >>> from analysis.recording import Recording
    >>> fs = 10_000.0
    >>> t = np.arange(int(2.2 * fs)) / fs
    >>> v = -60 + 80 * np.exp(-(((t % 0.5) / 0.5 - 0.3) / 0.05) ** 2)
    >>> result = analyze(Recording.from_array(v, fs))
    >>> len(result.beats), round(float(result.beats["cl_ms"][1]), 1)
    (5, 500.0)
    """
    if workers is not None:
        with use_workers(workers):
            return analyze(recording, settings, channel, sweeps, progress, label=label)
    s = settings or Settings()
    idx, note = choose_channel(recording, channel)
    ch = recording.channels[idx]
    warnings: list[str] = [note] if note else []
    for name, change in dict(recording.metadata.get("units_overridden", {})).items():
        warnings.append(f"units of channel {name} overridden ({change})")
    scale = _TO_MV.get(ch.units.strip().lower(), 1.0)
    overridden = dict(recording.metadata.get("units_overridden", {})).get(ch.name)
    if overridden:
        implausible = _implausible_range_note(recording, idx, scale, _sweep_list(recording, sweeps), overridden)
        if implausible:
            warnings.append(implausible)
    fs = recording.sampling_rate_hz
    file_label = label if label is not None else (
        os.path.basename(recording.source_path) if recording.source_path else "recording"
    )
    sweep_ids = _sweep_list(recording, sweeps)
    total = 2 * sum(recording.n_samples(i) for i in sweep_ids)
    done = [0]

    def tick(n: int) -> None:
        done[0] += n
        if progress is not None:
            progress(min(done[0], total), total)

    parts, artefacts, rise, hum_sweeps, spikes, surveys = [], {}, [], [], {}, {}
    for sw in sweep_ids:
        try:
            cols, art, rise_sw, surveys[sw], spikes[sw] = _analyse_sweep(recording, sw, idx, scale, s, tick)
        except SettingsError as exc:
            if exc.path is not None:
                raise
            # A setting that does not suit this recording (a low-pass corner above its Nyquist
            # frequency): name the recording, as every input error names a file.
            raise SettingsError(recording.source_path or "the data given", exc.problem, exc.fix) from None
        artefacts[sw] = art
        if surveys[sw]:
            hum_sweeps.append(sw)
        if cols is None:
            warnings.append(f"sweep {sw}: no beats found{_artefact_note(art)}")
            continue
        cols["file"] = np.array([file_label] * len(cols["sweep"]), dtype=object)
        parts.append(cols)
        rise.extend(rise_sw)
    beats = _table(parts, s)
    _sampling_warning(rise, fs, s, warnings)
    if hum_sweeps:
        warnings.append(f"mains hum found and subtracted in sweep(s) {_ranges(hum_sweeps)} (preprocess.hum_removal)")
    beats, more = flag_and_reject(beats, recording, idx, s, scale=scale, hum=surveys, spikes=spikes)
    warnings.extend(more)
    return AnalysisResult(
        beats=beats, warnings=warnings, channel=idx, channel_name=ch.name, settings=s, recording=recording,
        ljp_mV=s.preprocess.ljp_mV, artefacts=artefacts, hum_sweeps=hum_sweeps, spikes=spikes,
    )


#: The widest span a membrane potential plausibly takes (mV): beyond it a channel's values are not
#: a membrane potential in mV (MEASUREMENTS.md: MDPs -50 to -90 mV, peaks up to about +40 mV).
_PLAUSIBLE_MV = (-150.0, 100.0)


def _implausible_range_note(recording: Recording, idx: int, scale: float, sweeps: list[int], change: str) -> str | None:
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


def _ranges(items: list[int]) -> str:
    """``[0, 1, 2, 5]`` -> ``"0-2, 5"``."""
    out, start, prev = [], None, None
    for i in items + [None]:
        if start is None:
            start = prev = i
        elif i is not None and i == prev + 1:
            prev = i
        else:
            out.append(f"{start}" if start == prev else f"{start}-{prev}")
            start = prev = i
    return ", ".join(out)


def _artefact_note(art) -> str:
    reasons = list(art[1])
    if not reasons:
        return ""

    parts = [f"{reasons.count(r)} {r}" for r in ARTEFACT_REASONS if r in reasons]
    return f" ({', '.join(parts)} event(s) rejected as artefacts; see the detection settings)"


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


def _analyse_sweep(recording, sw, ch, scale, s: Settings, tick):
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

    det = detect_sweep(load, n, fs, settings=s.detection, noise_mV=noise, pad=pad, progress=detected)
    tick(n - sent[0])
    art = (det.i_artefact, det.artefact_reason)
    ups = det.i_upstroke
    if ups.size == 0:
        tick(n)
        return None, art, [], load.hum, det.spike_spans
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
    return cols, art, rise, load.hum, det.spike_spans


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
        start_at = int(prev[k0]) if prev[k0] >= 0 else int(ups[k0])
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


def _table(parts: list[dict], s: Settings) -> BeatTable:
    percents = s.measurement.apd_percent
    extra_apd = [f"{apd_name(p)}_ms" for p in percents if f"{apd_name(p)}_ms" not in CSV_COLUMNS]
    names = [*CSV_COLUMNS, *extra_apd, *marker_columns(percents), "reject_reason"]
    if not parts:
        return BeatTable({n: [] for n in names})
    return BeatTable({n: np.concatenate([p[n] for p in parts]) for n in names})


def _sampling_warning(rise_samples: list[float], fs: float, s: Settings, warnings: list[str]) -> None:
    r = np.asarray([x for x in rise_samples if math.isfinite(x)])
    if r.size == 0:
        return
    med = float(np.median(r))
    need = s.measurement.min_rise_samples
    if med < need:
        rise_ms = med / fs * 1e3
        warnings.append(
            f"the upstrokes rise 10-90 % in a median of {med:.1f} samples ({rise_ms:.2f} ms at "
            f"{fs / 1e3:g} kHz), fewer than {need:g}: dV/dt max cannot be trusted (and upstroke times "
            f"are coarse); record at {math.ceil(need / rise_ms):g} kHz or more for these cells"
        )


def flag_and_reject(
    beats: BeatTable, recording: Recording, channel: int, settings: Settings, *, scale: float = 1.0,
    hum: bool | dict = True, spikes: dict | None = None,
) -> tuple[BeatTable, list[str]]:
    """The hook where events and quality rules flag and automatically reject measured beats.

    Runs :func:`analysis.flags.apply_events` when the settings carry a ``quality`` section;
    otherwise returns the table unchanged. The events module reads each sweep's preprocessed
    samples in windows of beats (:class:`analysis.flags.RecordingSweeps`), never a whole sweep.
    ``hum`` says whether any sweep carries hum, or gives each sweep's
    :class:`analysis.signal.HumSurvey` (False where none) as the analysis judged it; ``spikes`` (per
    sweep, the spike spans detection bridged, :attr:`AnalysisResult.spikes`) spares the events
    finding them again; None finds them.
    """
    quality = getattr(settings, "quality", None)
    if quality is None or len(beats) == 0:
        return beats, []

    # Read in windows (with filter context), so memory stays bounded by a chunk of beats. Without
    # hum in any sweep, the windows need not look for it again.
    any_hum = any(hum.values()) if isinstance(hum, dict) else bool(hum)
    pre = settings.preprocess if any_hum else dataclasses.replace(settings.preprocess, hum_removal="off")
    sweeps_v = flags.RecordingSweeps(recording, channel, scale=scale, preprocess=pre,
                                      hum_surveys=hum if isinstance(hum, dict) else None)
    sweeps_raw = flags.RecordingSweeps(recording, channel, scale=scale)
    return flags.apply_events(beats, sweeps_v, recording.sampling_rate_hz, quality, sweeps_raw=sweeps_raw,
                               detection=settings.detection, spikes=spikes)
