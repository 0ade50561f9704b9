"""Opening a results file reads its index; each recording's tables are read when first used."""

from __future__ import annotations

import h5py

from analysis.conditions import parse_condition
from analysis.session import Session
from analysis.synthetic import preset, synthesize


def _session() -> Session:
    s = Session()
    for i in range(3):
        syn = synthesize(preset("nodal-like"), duration_s=4.0, fs_hz=5_000.0, seed=40 + i)
        key = s.add(syn.recording, label=f"NL-04{i:02d}.abf", conditions=[parse_condition("baseline=0-2s")])
        s.reject(key, [1], "electrode bump")
    return s


def test_open_reads_the_index_and_each_recording_on_first_use(tmp_path):
    s = _session()
    path = tmp_path / "study.h5"
    s.save(path)
    opened = Session.open(path)
    entries = [opened._entry(k) for k in opened.recordings]
    assert [opened.label(k) for k in opened.recordings] == ["NL-0400.abf", "NL-0401.abf", "NL-0402.abf"]
    assert opened.settings(opened.recordings[0]) == s.settings(s.recordings[0])
    assert not any(e.loaded for e in entries)  # labels and settings come from the index alone
    last = opened.recordings[2]
    assert opened.beats(last).equals(s.beats(s.recordings[2]))
    assert entries[2].loaded and not entries[0].loaded
    for k_new, k_old in zip(opened.recordings, s.recordings):
        assert opened.beats(k_new).equals(s.beats(k_old))
        assert opened.decisions(k_new) == s.decisions(k_old) and opened.conditions(k_new) == s.conditions(k_old)
        # The stored summaries, value for value (repr shows NaN and every float digit).
        assert [repr(x.values) for x in opened.summaries(k_new)] == [repr(x.values) for x in s.summaries(k_old)]


def test_saving_elsewhere_keeps_another_module_s_groups(tmp_path):
    path = tmp_path / "study.h5"
    _session().save(path)
    with h5py.File(path, "r+") as f:
        f.create_group("study").attrs["cells"] = 3
    opened = Session.open(path)
    opened.reject(opened.recordings[0], [2], "checked")
    opened.save(tmp_path / "copy.h5")
    with h5py.File(tmp_path / "copy.h5", "r") as f:
        assert f["study"].attrs["cells"] == 3


def test_a_changed_source_is_noticed_by_size_at_open_and_by_sha256_when_opened(tmp_path):
    from analysis.synthetic import write_abf

    src = tmp_path / "NL-0417.abf"
    write_abf(synthesize(preset("nodal-like"), duration_s=3.0, fs_hz=5_000.0, seed=5).recording, src)
    s = Session()
    s.add(src)
    s.save(tmp_path / "study.h5")
    assert Session.open(tmp_path / "study.h5").open_warnings == []
    data = bytearray(src.read_bytes())
    data[-2:] = bytes([data[-2] ^ 0xFF, data[-1] ^ 0xFF])  # the last sample changed, same size
    src.write_bytes(bytes(data))
    opened = Session.open(tmp_path / "study.h5")
    assert opened.open_warnings == []  # the size alone cannot tell; nothing read yet
    heard = []
    opened.subscribe("warning", heard.append)
    opened.recording(opened.recordings[0])
    assert any("SHA-256 differs" in w for w in opened.open_warnings)
    assert any(c.event == "warning" and "has changed" in c.detail for c in heard)
    src.write_bytes(bytes(data) + b"\0\0")
    assert any("its size differs" in w for w in Session.open(tmp_path / "study.h5").open_warnings)
