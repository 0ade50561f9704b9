"""``analyze``: one recording in, the beats table out.

recording -> channel (current clamp only, :mod:`analysis.pipeline._channel`) -> per sweep: LJP
correction and filters, chunked detection, chunked measurement (:mod:`analysis.pipeline._sweep`)
-> feature registry -> beat table -> events and quality rules
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

import analysis.flags as flags
from analysis.beats import ARTEFACT_REASONS, apd_name, marker_columns
from analysis.chunkpool import use_workers
from analysis.decisions import TO_REVIEW, apply_status
from analysis.errors import RecordingError, SettingsError
from analysis.pipeline._channel import choose_channel, implausible_range_note
from analysis.pipeline._sweep import analyse_sweep
from analysis.recording import Recording
from analysis.settings import Settings
from analysis.table import CSV_COLUMNS, BeatTable
from analysis.sweeps import SweepSelection

__all__ = ["AnalysisResult", "analyze", "flag_and_reject"]

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
    detections : dict of int to Detection
        Per sweep, what detection found (:func:`analysis.beats.detect_sweep`): hand it back to
        :func:`analyze` (``detections=``) to measure again under new measurement or quality
        settings without detecting again.
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
    detections: dict = field(default_factory=dict)


def _sweep_list(recording: Recording, sweeps: Sequence[int] | SweepSelection | None) -> list[int]:
    if sweeps is None:
        return list(range(recording.n_sweeps))
    if isinstance(sweeps, SweepSelection):  # ranges: checked on their ends before any list is made
        return list(sweeps.resolve(recording.n_sweeps, recording.source_path))
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
    detections: dict | None = None,
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
    detections : dict or None
        An earlier result's :attr:`AnalysisResult.detections`, found with the same preprocess
        and detection settings: the sweeps it holds are measured from those detections without
        detecting again (a change of measurement or quality settings). None detects every sweep.

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
            return analyze(recording, settings, channel, sweeps, progress, label=label, detections=detections)
    s = settings or Settings()
    idx, note = choose_channel(recording, channel)
    ch = recording.channels[idx]
    warnings: list[str] = [note] if note else []
    for name, change in dict(recording.metadata.get("units_overridden", {})).items():
        warnings.append(f"units of channel {name} overridden ({change})")
    scale = _TO_MV.get(ch.units.strip().lower(), 1.0)
    overridden = dict(recording.metadata.get("units_overridden", {})).get(ch.name)
    if overridden:
        implausible = implausible_range_note(recording, idx, scale, _sweep_list(recording, sweeps), overridden)
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

    parts, artefacts, rise, hum_sweeps, spikes, surveys, found = [], {}, [], [], {}, {}, {}
    for sw in sweep_ids:
        try:
            cols, art, rise_sw, surveys[sw], spikes[sw], found[sw] = analyse_sweep(
                recording, sw, idx, scale, s, tick, (detections or {}).get(sw))
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
    # The status columns take their place before the events add theirs (flag_and_reject fills them).
    k = len(beats)
    beats = beats.with_columns(
        recording_id=np.full(k, recording.recording_id, dtype=object), verdict=np.full(k, "", dtype=object),
        decided_by=np.full(k, "", dtype=object), reviewed=np.zeros(k, np.int64),
    )
    _sampling_warning(rise, fs, s, warnings)
    if hum_sweeps:
        warnings.append(f"mains hum found and subtracted in sweep(s) {_ranges(hum_sweeps)} (preprocess.hum_removal)")
    beats, more = flag_and_reject(beats, recording, idx, s, scale=scale, hum=surveys, spikes=spikes)
    warnings.extend(more)
    return AnalysisResult(
        beats=beats, warnings=warnings, channel=idx, channel_name=ch.name, settings=s, recording=recording,
        ljp_mV=s.preprocess.ljp_mV, artefacts=artefacts, hum_sweeps=hum_sweeps, spikes=spikes, detections=found,
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

    Runs :func:`analysis.flags.apply_events` when the settings carry a ``quality`` section, then
    writes each beat's automatic status (:func:`analysis.decisions.apply_status`: accepted,
    rejected by a rule, or held for review by a flag of ``quality.review_flags``). The events
    module reads each sweep's preprocessed samples in windows of beats
    (:class:`analysis.flags.RecordingSweeps`), never a whole sweep.
    ``hum`` says whether any sweep carries hum, or gives each sweep's
    :class:`analysis.signal.HumSurvey` (False where none) as the analysis judged it; ``spikes`` (per
    sweep, the spike spans detection bridged, :attr:`AnalysisResult.spikes`) spares the events
    finding them again; None finds them.
    """
    quality = getattr(settings, "quality", None)
    review_flags = getattr(quality, "review_flags", ())
    if quality is None or len(beats) == 0:
        return apply_status(beats, None, review_flags), []

    # Read in windows (with filter context), so memory stays bounded by a chunk of beats. Without
    # hum in any sweep, the windows need not look for it again.
    any_hum = any(hum.values()) if isinstance(hum, dict) else bool(hum)
    pre = settings.preprocess if any_hum else dataclasses.replace(settings.preprocess, hum_removal="off")
    sweeps_v = flags.RecordingSweeps(recording, channel, scale=scale, preprocess=pre,
                                      hum_surveys=hum if isinstance(hum, dict) else None)
    sweeps_raw = flags.RecordingSweeps(recording, channel, scale=scale)
    table, warnings = flags.apply_events(beats, sweeps_v, recording.sampling_rate_hz, quality, sweeps_raw=sweeps_raw,
                                         detection=settings.detection, spikes=spikes)
    table = apply_status(table, None, review_flags)
    held = np.flatnonzero(table["verdict"] == TO_REVIEW)
    if held.size:
        found = {w for f in table["flags"][held] for w in str(f).split(";")}
        words = ", ".join(w for w in review_flags if w in found)
        warnings.append(
            f"{held.size} beat(s) wait for review, flagged {words} (quality.review_flags): "
            "the summaries leave them out until they are accepted or rejected"
        )
    return table, warnings
