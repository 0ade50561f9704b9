"""The bundled sample recordings: made again bit for bit by their script, small, and consistent.

``sample_data/make_samples.py`` is run into a temporary folder and its output compared with the
committed files byte for byte. The NWB file's bytes depend on the versions of pynwb, hdmf, h5py
and HDF5 (its cached schema, HDF5's layout, zlib's compression) as well as on the data: they are
compared when MANIFEST.json's versions are the running ones; otherwise that one comparison is
skipped (saying so) and the NWB file's decoded samples and metadata are compared instead, and two
fresh writes are checked to be identical.
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
from pathlib import Path

import numpy as np
import pytest

from analysis import open_recording
from app import demo_data

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_data"
NWB = demo_data.GAP_FREE_NWB


def _load_script():
    spec = importlib.util.spec_from_file_location("make_samples", SAMPLES / "make_samples.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_samples = _load_script()


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("samples")
    make_samples.make_samples(out)
    return out


def _manifest() -> dict:
    return json.loads((SAMPLES / "MANIFEST.json").read_text(encoding="utf-8"))


def _nwb_versions_match() -> bool:
    made, now = _manifest()["made_with"], make_samples.library_versions()
    return all(made.get(k) == now[k] for k in make_samples.NWB_LIBRARIES)


def test_every_file_is_committed_and_listed():
    listed = set(_manifest()["files"])
    assert listed == {
        demo_data.GAP_FREE_ABF, NWB, demo_data.EPISODIC_ABF, make_samples.TRUTH_GAP_FREE,
        make_samples.TRUTH_EPISODIC, "README.md",
    }
    for name, entry in _manifest()["files"].items():
        data = (SAMPLES / name).read_bytes()
        assert len(data) == entry["bytes"], name
        assert hashlib.sha256(data).hexdigest() == entry["sha256"], name


def test_a_non_editable_install_ships_every_sample_file():
    import tomllib

    with open(ROOT / "pyproject.toml", "rb") as fh:
        data_files = tomllib.load(fh)["tool"]["setuptools"]["data-files"]
    shipped = {Path(p).name for p in data_files["share/upstroke/sample_data"]}
    assert shipped == set(_manifest()["files"]) | {"MANIFEST.json"}
    assert Path("share/upstroke/sample_data") in [Path(*p.parts[-3:]) for p in demo_data._candidate_folders()]


def test_the_samples_stay_under_ten_megabytes():
    total = sum(p.stat().st_size for p in SAMPLES.iterdir() if p.is_file())
    assert total < 10_000_000  # the project's size limit for bundled data (common practice, no source)


@pytest.mark.slow
@pytest.mark.parametrize("name", [
    demo_data.GAP_FREE_ABF, demo_data.EPISODIC_ABF, "NL-0417_truth.csv", "VL-0212_truth.csv", "README.md",
])
def test_the_script_makes_the_committed_file_bit_for_bit(regenerated, name):
    assert (regenerated / name).read_bytes() == (SAMPLES / name).read_bytes(), (
        f"sample_data/{name} differs from what make_samples.py writes: run python sample_data/make_samples.py"
    )


@pytest.mark.slow
def test_the_script_makes_the_committed_nwb_file_bit_for_bit(regenerated):
    if not _nwb_versions_match():
        pytest.skip(
            "the NWB file was written with other versions of pynwb/hdmf/h5py/HDF5 than these "
            f"({_manifest()['made_with']}): its bytes may differ; its samples and metadata are compared instead"
        )
    assert (regenerated / NWB).read_bytes() == (SAMPLES / NWB).read_bytes()


def test_two_fresh_nwb_writes_are_identical(tmp_path):
    # Whatever the library versions, the writer itself leaves nothing to chance (UUIDs, dates).
    a, b = tmp_path / "a.nwb", tmp_path / "b.nwb"
    make_samples.write_nwb_copy(SAMPLES / demo_data.GAP_FREE_ABF, a)
    make_samples.write_nwb_copy(SAMPLES / demo_data.GAP_FREE_ABF, b)
    assert a.read_bytes() == b.read_bytes()


def test_the_nwb_file_holds_the_abf_samples_exactly():
    abf = open_recording(SAMPLES / demo_data.GAP_FREE_ABF)
    nwb = open_recording(SAMPLES / NWB)
    assert (nwb.n_sweeps, nwb.sampling_rate_hz, nwb.units(0)) == (1, demo_data.FS_HZ, "mV")
    assert nwb.channels[0].clamp_mode == abf.channels[0].clamp_mode == "current clamp"
    counts, mv_per_count = make_samples.abf_counts(SAMPLES / demo_data.GAP_FREE_ABF)
    # The NWB file stores the ABF's int16 counts; the standard's data x conversion gives volts.
    import h5py

    with h5py.File(SAMPLES / NWB, "r") as fh:
        ds = fh["acquisition/Vm_000/data"]
        assert ds.dtype == np.int16 and np.array_equal(ds[:], counts)
        assert fh["acquisition/Vm_000/data"].attrs["conversion"] == pytest.approx(mv_per_count * 1e-3, rel=1e-12)
        assert fh["general/session_id"][()].decode() == demo_data.CELL_ID
    np.testing.assert_allclose(nwb.sweep(0), abf.sweep(0), rtol=1e-12, atol=1e-12)


def test_the_abf_files_read_the_same_with_an_independent_reader():
    neo = pytest.importorskip("neo")  # neo's AxonIO: an ABF reader independent of pyabf
    for name in (demo_data.GAP_FREE_ABF, demo_data.EPISODIC_ABF):
        ours = open_recording(SAMPLES / name)
        block = neo.io.AxonIO(str(SAMPLES / name)).read_block(signal_group_mode="split-all")
        signals = [seg.analogsignals[0] for seg in block.segments]
        assert float(signals[0].sampling_rate.rescale("Hz").magnitude) == pytest.approx(ours.sampling_rate_hz)
        # The ABF1 writer leaves out the synch array, so neo reads the episodes as one stretch:
        # compare the samples end to end.
        theirs = np.concatenate([np.asarray(sig.rescale("mV").magnitude).ravel() for sig in signals])
        mine = np.concatenate([ours.sweep(i) for i in range(ours.n_sweeps)])
        np.testing.assert_allclose(theirs, mine, atol=1e-4)  # float32 in neo


def test_the_truth_tables_are_the_synthesis_truth():
    truth = demo_data.episodic_scenario().truth.beats
    lines = (SAMPLES / make_samples.TRUTH_EPISODIC).read_text(encoding="utf-8").splitlines()
    assert lines[0].startswith("file,sweep,beat,")  # the beats CSV's header (CONTRACT.md)
    assert len(lines) - 1 == len(truth)
    t = [float(line.split(",")[3]) for line in lines[1:]]
    np.testing.assert_allclose(t, truth["t_upstroke_s"], atol=5e-7)


@pytest.mark.slow
def test_the_readme_says_the_data_are_invented_and_lists_every_planted_event():
    text = (SAMPLES / "README.md").read_text(encoding="utf-8")
    assert "invented" in text.lower() and "fictional" in text.lower()
    for kind_word in ("artefact", "afterdepolarisation", "pause", "seal trouble"):
        assert kind_word in text
    events = demo_data.gap_free_scenario().truth.events
    for t in events["t_s"]:
        assert f"| {t:.3f} |" in text
