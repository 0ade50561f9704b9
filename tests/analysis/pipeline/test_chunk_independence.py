"""The beat table does not depend on the chunk length (``detection.chunk_s``).

Common practice, no source: chunks only bound memory, so working a sweep in chunks of any
length must give the beats, the measurements and the events of the whole sweep.
"""

from __future__ import annotations

import numpy as np
import pytest

from analysis import Recording, Settings, analyze
from analysis.synthetic import SealTrouble, preset, synthesize

FS = 10_000.0
#: The converter's step of a 16-bit recording over +-1 V (ABF and NWB store such integers):
#: quantised samples give equal neighbours, so MDP vertices fall exactly halfway between samples.
LSB_MV = 2000.0 / 65536


def _troubled_cell() -> Recording:
    """A nodal-like cell with hum and four seconds of leaky seal whose noise leaves no quiet
    diastole for the hum estimate, quantised like a 16-bit recording."""
    syn = synthesize(
        preset("nodal-like"), duration_s=24.0, fs_hz=FS, seed=11, noise_mV=0.3, hum_mV=0.4, hum_hz=50.0,
        drift_mV_per_min=0.8, seal_troubles=[SealTrouble(12.0, 17.0, depolarisation_mV=12.0, noise_mV=1.5)],
    )
    v = np.round(syn.recording.sweep(0) / LSB_MV) * LSB_MV
    return Recording.from_array(v, FS)


def _assert_same_table(a, b) -> None:
    assert a.names == b.names and len(a) == len(b)
    for name in a.names:
        x, y = np.asarray(a[name]), np.asarray(b[name])
        if x.dtype.kind == "f":
            np.testing.assert_allclose(y, x, rtol=1e-9, atol=1e-9, equal_nan=True, err_msg=name)
        else:
            np.testing.assert_array_equal(y, x, err_msg=name)


@pytest.mark.parametrize("chunk_s", [1.0, 7.3])
def test_beat_table_does_not_depend_on_the_chunk_length(chunk_s):
    rec = _troubled_cell()
    whole = analyze(rec, Settings())  # the default chunk (60 s) holds the 24 s sweep whole
    chunked = analyze(rec, Settings().replace("detection.chunk_s", chunk_s))
    assert len(whole.beats) > 20 and whole.hum_sweeps == [0]
    # the seal trouble's beats are there and flagged noisy, so the stretch is measured
    t = whole.beats["t_upstroke_s"]
    inside = (t > 12.5) & (t < 16.5)
    assert inside.sum() >= 3 and all("noisy" in f for f in whole.beats["flags"][inside])
    _assert_same_table(whole.beats, chunked.beats)


def test_hum_removal_of_a_chunk_inside_a_long_loud_stretch_equals_the_whole_sweep():
    # 6 s of 1.5 mV noise (no quiet samples for the hum estimate) between quiet stretches with
    # 0.4 mV of 50 Hz hum; chunks ending inside the loud stretch, read with the documented
    # context, give the whole sweep's samples.
    from analysis.signal import hum_pad_samples, hum_survey, remove_hum

    rng = np.random.default_rng(3)
    t = np.arange(int(20 * FS)) / FS
    v = -60 + 0.4 * np.sin(2 * np.pi * 50 * t + 0.3) + 0.2 * rng.normal(size=t.size)
    loud = (t >= 7.0) & (t < 13.0)
    v[loud] += 1.5 * rng.normal(size=int(loud.sum()))
    survey = hum_survey(v, FS)
    assert survey.components == ((50.0, 1),)
    whole, _ = remove_hum(v, FS, present=survey)
    pad = hum_pad_samples(FS, 1.0)
    for a_s in (5.5, 6.9, 8.0, 11.2, 12.4):
        a, b = int(a_s * FS), int((a_s + 1.0) * FS)
        part, _ = remove_hum(v[a - pad:b + pad], FS, offset=a - pad, present=survey)
        np.testing.assert_allclose(part[pad:-pad], whole[a:b], rtol=0, atol=1e-9)
    # the quiet stretches lose their hum (the sinusoid put in; 0.2 mV rms of noise is left)
    quiet = (t > 2.0) & (t < 5.0)
    assert np.std(whole[quiet] - (v[quiet] - 0.4 * np.sin(2 * np.pi * 50 * t[quiet] + 0.3))) < 0.02


def test_markers_do_not_depend_on_where_the_stretch_read_starts():
    # Each beat of a noisy, quantised cell measured on stretches of the sweep starting at 16
    # neighbouring samples (every position on the coarse grid that locates the diastole's
    # minimum) gives the markers of the whole sweep. In the leaky seal's 1.5 mV of noise a
    # trough has minima of nearly equal depth, and a grid that followed the stretch's start
    # picked one or the other.
    from analysis.beats import measure_beats

    syn = synthesize(
        preset("nodal-like"), duration_s=24.0, fs_hz=FS, seed=0, noise_mV=0.3, drift_mV_per_min=0.8,
        seal_troubles=[SealTrouble(12.0, 17.0, depolarisation_mV=12.0, noise_mV=1.5)],
    )
    v = np.round(syn.recording.sweep(0) / LSB_MV) * LSB_MV
    ups = np.rint(np.asarray(syn.truth.beats["t_upstroke_s"]) * FS).astype(np.int64)
    ref = measure_beats(v, FS, ups, noise_mV=0.3)
    for b in range(2, ups.size - 1):
        for shift in range(16):
            a = int(ups[b - 1]) - 2000 - shift
            z = int(ups[b + 1]) + 2000
            m = measure_beats(v[a:z], FS, ups[b:b + 1] - a, i_previous=ups[b - 1:b] - a,
                              i_next=ups[b + 1:b + 2] - a, noise_mV=0.3, offset=a)
            for name, x in ref.values.items():
                np.testing.assert_allclose(m.values[name], x[b:b + 1], rtol=1e-9, atol=1e-9, equal_nan=True,
                                           err_msg=f"{name} of beat {b}, stretch from sample {a}")
