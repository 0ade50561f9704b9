"""The ABF reader against independent readers (neo's AxonIO, pyabf's own data path) and writers."""

from __future__ import annotations

import numpy as np
import pytest

from analysis import open_recording
from analysis.errors import RecordingError
from analysis.readers import abf as abf_reader
from tests import recording_files as files


@pytest.fixture(scope="module")
def myokit_abf(myokit_data_dir):
    folder = myokit_data_dir / "formats"
    paths = {v: folder / f"abf-{v}.abf" for v in ("v1", "v2")}
    for path in paths.values():
        if not path.is_file():
            pytest.skip(f"myokit's ABF test file {path} is missing")
    return paths


def _neo_segments(path):
    neo = pytest.importorskip("neo", reason="neo is in the test extras")
    block = neo.io.AxonIO(str(path)).read_block(signal_group_mode="split-all")
    return block.segments


def _neo_step(path):
    """One int16 step of channel 0 as neo's raw reader scales it."""
    from neo.rawio import AxonRawIO

    raw = AxonRawIO(str(path))
    raw.parse_header()
    return abs(float(raw.header["signal_channels"]["gain"][0]))


@pytest.mark.parametrize("version", ["v1", "v2"])
def test_myokit_abf_matches_neo_sweep_for_sweep(myokit_abf, version):
    path = myokit_abf[version]
    rec = open_recording(path)
    segments = _neo_segments(path)
    # Independent reader: neo's AxonIO (its own ABF parser) on files myokit ships.
    assert rec.n_sweeps == len(segments)
    signal0 = segments[0].analogsignals[0]
    assert rec.sampling_rate_hz == pytest.approx(float(signal0.sampling_rate.rescale("Hz")), rel=1e-9)
    assert rec.units(0) == signal0.units.dimensionality.string == "pA"
    assert rec.channels[0].clamp_mode == "voltage clamp"  # pA: a membrane current (myokit: I_Na tests)
    step = _neo_step(path)
    for i, segment in enumerate(segments):
        theirs = np.asarray(segment.analogsignals[0].magnitude[:, 0], dtype=np.float64)
        ours = rec.sweep(i, 0)
        assert ours.shape == theirs.shape
        # Same digitised sample everywhere: neo scales in float32, so allow a thousandth of a step.
        np.testing.assert_allclose(ours, theirs, rtol=0, atol=1e-3 * step)
        assert rec.sweep_starts_s[i] == pytest.approx(float(segment.t_start.rescale("s")), abs=1e-9)


@pytest.mark.parametrize("version", ["v1", "v2"])
def test_myokit_abf_matches_pyabf_full_load(myokit_abf, version):
    pyabf = pytest.importorskip("pyabf")
    path = myokit_abf[version]
    rec = open_recording(path)
    full = pyabf.ABF(str(path))  # pyabf's own path: the whole file converted at open
    for i in range(full.sweepCount):
        full.setSweep(i)
        # pyabf keeps float32; ours is float64 of the same int16 code and scale (rel. 1e-6).
        np.testing.assert_allclose(rec.sweep(i), full.sweepY, rtol=1e-6, atol=1e-6)


def test_slices_equal_the_whole_sweep(myokit_abf):
    rec = open_recording(myokit_abf["v2"])
    whole = rec.sweep(5)
    np.testing.assert_array_equal(rec.sweep(5, start=100, stop=300), whole[100:300])  # common practice, no source
    assert rec.sweep(5, start=10, stop=10).size == 0


def test_pyabf_writer_round_trip_within_one_step(tmp_path):
    rng = np.random.default_rng(7)
    t = np.arange(6000) / 20_000.0
    sweeps = np.stack([
        -65 + 100 * np.clip(np.sin(2 * np.pi * 3 * t + k), 0, None) ** 8 + rng.normal(0, 0.3, t.size)
        for k in range(3)
    ])
    path = files.write_abf1(tmp_path / "written.abf", sweeps, 20_000.0, units="mV")
    rec = open_recording(path)
    assert (rec.n_sweeps, rec.sampling_rate_hz, rec.units(0)) == (3, 20_000.0, "mV")
    assert rec.channels[0].clamp_mode == "current clamp"
    assert rec.channels[0].name == "ch0"  # the writer leaves names blank (NUL bytes)
    step = files.abf1_step(path)
    for k in range(3):
        # pyabf's writer truncates to int16 codes, so each sample is within one step of the
        # input; the header stores the scale factor as float32, which adds its rounding (2**-24).
        allowed = step + np.abs(sweeps[k]) * 2.0**-23
        assert np.all(np.abs(rec.sweep(k) - sweeps[k]) < allowed)


def test_short_abf1_header_has_no_comment_read_from_the_samples(tmp_path):
    # pyabf's ABF 1 writer makes a 2048-byte header; the ABF 1 layout keeps the file comment at
    # bytes 5154-5210 (pyabf headerV1), which then lie in the samples and are not a comment.
    t = np.arange(20_000) / 10_000.0
    path = files.write_abf1(tmp_path / "short_header.abf", [-60 + 30 * np.sin(7 * t)], 10_000.0)
    rec = open_recording(path)
    assert "comment" not in rec.metadata


def test_gap_free_file_is_one_sweep(tmp_path):
    t = np.arange(50_000) / 10_000.0
    path = files.write_abf1(tmp_path / "long.abf", [-60 + 5 * np.sin(t)], 10_000.0)
    files.patch(path, 8, "h", 3)  # nOperationMode 3: gap-free (ABF 1 header, pyabf headerV1)
    rec = open_recording(path)
    assert rec.is_gap_free and rec.n_samples(0) == 50_000
    assert rec.metadata["operation_mode"] == "gap-free"
    assert rec.sweep_starts_s == (0.0,)
    np.testing.assert_allclose(rec.sweep(0, start=40_000, stop=40_010), -60 + 5 * np.sin(t[40_000:40_010]),
                               atol=files.abf1_step(path))


def test_sniff_recognises_both_signatures():
    assert abf_reader.sniff(b"ABF2\x00\x00") and abf_reader.sniff(b"ABF \x00")  # ABF signatures
    assert not abf_reader.sniff(b"\x89HDF\r\n\x1a\n")


def test_float_abf1_is_refused_plainly(tmp_path):
    path = files.write_abf1(tmp_path / "float.abf", np.zeros((1, 4000)), 10_000.0)
    files.patch(path, 100, "h", 1)  # nDataFormat 1: float32 samples, which pyabf cannot read in ABF 1
    with pytest.raises(RecordingError, match="floating-point samples"):
        open_recording(path)


def test_header_sizes_checked_before_allocating(myokit_abf, tmp_path):
    path = files.copy(myokit_abf["v2"], tmp_path / "huge.abf")
    files.patch(path, files.ABF2_DATA_SECTION + 8, "q", 2**40)  # data section entry count
    with pytest.raises(RecordingError, match=r"declares 1099511627776 samples .* holds only 44544 bytes"):
        open_recording(path)
    path = files.copy(myokit_abf["v2"], tmp_path / "tags.abf")
    files.patch(path, files.ABF2_TAG_SECTION + 8, "q", 2**31 - 1)  # pyabf would build 2**31 tags
    with pytest.raises(RecordingError, match="tag section .* past the end"):
        open_recording(path)


def test_no_channels(myokit_abf, tmp_path):
    path = files.copy(myokit_abf["v2"], tmp_path / "nochan.abf")
    files.patch(path, files.ABF2_ADC_SECTION + 8, "q", 0)
    with pytest.raises(RecordingError, match="no channels"):
        open_recording(path)


def test_too_few_samples(tmp_path):
    path = files.write_abf1(tmp_path / "short.abf", np.zeros((1, 4000)), 10_000.0)
    files.patch(path, files.ABF1_ACQ_LENGTH, "i", 40)
    with pytest.raises(RecordingError, match="only 40 samples per sweep"):
        open_recording(path)
