"""All real ABF files in ../shared/real-abf against their MANIFEST.csv (what pyabf reads).

The files come from working labs (see that folder's README); the manifest lists, per file,
pyabf's sweeps, units and per-channel min and max of sweep 0, rounded to 3 decimals.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest

from analysis import open_recording

pytestmark = pytest.mark.realdata


def _manifest(folder):
    with open(folder / "MANIFEST.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def _floats(cell):
    return [float(x) for x in cell.split("|")]


def test_every_file_matches_the_manifest(real_abf_dir):
    rows = _manifest(real_abf_dir)
    assert len(rows) == 69  # the folder's README: 69 files
    problems = []
    for row in rows:
        rec = open_recording(real_abf_dir / row["file"])
        units = row["units"].split("|")
        got = (rec.n_sweeps, rec.n_channels, [c.units for c in rec.channels])
        want = (int(row["sweeps"]), int(row["channels"]), units)
        if got != want:
            problems.append(f"{row['file']}: sweeps/channels/units {got} != {want}")
            continue
        if int(rec.sampling_rate_hz) != int(row["sample_rate_hz"]):  # pyabf rounds the rate down
            problems.append(f"{row['file']}: rate {rec.sampling_rate_hz} != {row['sample_rate_hz']}")
        if len(set(rec.sweep_lengths)) == 1 and rec.sweep_lengths[0] != int(row["points_per_sweep"]):
            problems.append(f"{row['file']}: {rec.sweep_lengths[0]} samples per sweep")
        for c, (lo, hi) in enumerate(zip(_floats(row["sweep0_min"]), _floats(row["sweep0_max"]))):
            v = rec.sweep(0, c)
            # The manifest's 3 decimals (half a unit of the last place, plus float32 rounding).
            for name, ours, theirs in (("min", v.min(), lo), ("max", v.max(), hi)):
                if abs(ours - theirs) > 5e-4 + 1e-6 * abs(theirs):
                    problems.append(f"{row['file']} channel {c} {name}: {ours:.4f} != {theirs:.3f}")
    assert not problems, "\n".join(problems)


def test_every_sweep_matches_pyabf_where_neo_disagrees(real_abf_dir):
    """The four ABF 1 files that neo reads as one segment: Upstroke follows pyabf's sweeps."""
    pyabf = pytest.importorskip("pyabf")
    split = [r for r in _manifest(real_abf_dir) if r["neo_agrees"] == "0"]
    assert len(split) == 4  # the folder's README
    for row in split:
        rec = open_recording(real_abf_dir / row["file"])
        full = pyabf.ABF(str(real_abf_dir / row["file"]))
        assert rec.n_sweeps == full.sweepCount == int(row["sweeps"]) > int(row["neo_segments"])
        for i in range(rec.n_sweeps):
            full.setSweep(i)
            np.testing.assert_allclose(rec.sweep(i), full.sweepY, rtol=1e-6, atol=1e-4)  # pyabf float32


def test_variable_length_sweeps_follow_pyabf(real_abf_dir):
    pyabf = pytest.importorskip("pyabf")
    path = real_abf_dir / "2020_06_16_0000.abf"  # event-driven: three sweeps of different lengths
    rec = open_recording(path)
    full = pyabf.ABF(str(path))
    lengths = []
    for i in range(full.sweepCount):
        full.setSweep(i, absoluteTime=True)
        lengths.append(len(full.sweepY))
        np.testing.assert_allclose(rec.sweep(i), full.sweepY, rtol=1e-6, atol=1e-4)  # pyabf
        assert rec.sweep_starts_s[i] == pytest.approx(full.sweepX[0])  # pyabf's absolute time
    assert list(rec.sweep_lengths) == lengths and len(set(lengths)) == 3


def test_float_and_multichannel_files_match_pyabf(real_abf_dir):
    pyabf = pytest.importorskip("pyabf")
    for name in ("user-list-durations.abf", "File_axon_7.abf", "f1.abf", "test_0001.abf"):
        rec = open_recording(real_abf_dir / name)
        full = pyabf.ABF(str(real_abf_dir / name))
        last = full.sweepCount - 1
        for c in range(full.channelCount):
            full.setSweep(last, channel=c)
            np.testing.assert_allclose(rec.sweep(last, c), full.sweepY, rtol=1e-6, atol=1e-5)  # pyabf


def test_invalid_dates_do_not_crash_and_are_not_reported(real_abf_dir):
    for name in ("invalidDate-abf1.abf", "invalidDate-abf2.abf"):
        rec = open_recording(real_abf_dir / name)
        assert "recorded_at" not in rec.metadata  # pyabf marks these dates "ERROR"
    rec = open_recording(real_abf_dir / "14o16001_vc_pair_step.abf")
    assert rec.metadata["recorded_at"].startswith("2014-10-16T10:01:35")  # pyabf's abfDateTime


def test_header_metadata(real_abf_dir):
    rec = open_recording(real_abf_dir / "multichannelAbf1WithTags.abf")
    assert rec.metadata["abf_version"] == "1.8.4.0"  # MANIFEST.csv
    assert [t["comment"] for t in rec.metadata["tags"]] == ["+TGOT", "-TGOT"]  # pyabf tagComments
    assert rec.metadata["operation_mode"] == "episodic"


def test_units_override_for_mislabelled_file(real_abf_dir):
    path = real_abf_dir / "opto_aps_bad_units.abf"  # the README: action potentials stored as pA
    plain = open_recording(path)
    rec = open_recording(path, units={0: "mV"})
    assert plain.units(0) == "pA" and plain.channels[0].clamp_mode == "voltage clamp"  # MANIFEST.csv
    assert rec.units(0) == "mV" and rec.channels[0].clamp_mode == "current clamp"
    assert rec.metadata["units_overridden"] == {rec.channels[0].name: "pA -> mV"}
    np.testing.assert_array_equal(rec.sweep(1), plain.sweep(1))  # units declared, samples untouched
    by_name = open_recording(path, units={rec.channels[0].name: "mV"})
    assert by_name.units(0) == "mV"
