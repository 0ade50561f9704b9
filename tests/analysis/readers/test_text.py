"""The delimited-text reader on files written with numpy's savetxt and by hand."""

from __future__ import annotations

import numpy as np
import pytest

from analysis import open_recording
from analysis.errors import RecordingError
from analysis.readers.text import parse_label, sniff
from analysis.readers._timebase import rate_from_times
from tests import recording_files as files


@pytest.mark.parametrize(
    "label, expected",
    [
        ("time_s", ("time", "s")), ("t (ms)", ("t", "ms")), ("Vm (mV)", ("Vm", "mV")),
        ("V [V]", ("V", "V")), ("Im/pA", ("Im", "pA")), ('"Vm_mV"', ("Vm", "mV")),
        ("sweep", ("sweep", None)), ("ms", ("ms", "ms")),
    ],
)
def test_header_labels(label, expected):
    assert parse_label(label) == expected  # common practice for column headers, no source


def test_csv_in_seconds_and_mV(tmp_path):
    rows = files.regular_rows(3000, 10_000.0)
    path = files.write_text(tmp_path / "cell.csv", "time_s,Vm_mV", rows, fmt="%.7f")
    rec = open_recording(path)
    assert (rec.format, rec.n_sweeps, rec.n_channels) == ("text", 1, 1)
    assert rec.sampling_rate_hz == pytest.approx(10_000.0, rel=1e-9)
    assert rec.units(0) == "mV" and rec.channels[0].name == "Vm"
    np.testing.assert_allclose(rec.sweep(0), rows[:, 1], atol=5e-8)  # the 7 decimals written


def test_tsv_in_ms_and_volts_shown_as_mV(tmp_path):
    rows = files.regular_rows(3000, 20_000.0)
    rows = np.c_[rows[:, 0] * 1e3, rows[:, 1] * 1e-3, rows[:, 1] * 1e-3 + 0.001]
    path = files.write_text(tmp_path / "cell.tsv", "t (ms)\tV1 (V)\tV2 (V)", rows, delimiter="\t",
                            fmt="%.5f")
    rec = open_recording(path)
    assert rec.sampling_rate_hz == pytest.approx(20_000.0, rel=1e-9)  # 0.05 ms steps
    assert [c.name for c in rec.channels] == ["V1", "V2"]
    assert rec.units("V2") == "mV"
    np.testing.assert_allclose(rec.sweep(0, "V2"), rows[:, 2] * 1e3, atol=5e-3)  # 5 decimals of V


def test_whitespace_separated_with_spaced_units(tmp_path):
    rows = files.regular_rows(1000, 5000.0)
    path = files.write_text(tmp_path / "cell.txt", "time (s)   Vm (mV)", rows, delimiter="   ")
    rec = open_recording(path)
    assert rec.channels[0].name == "Vm" and rec.sampling_rate_hz == pytest.approx(5000.0)


def test_names_line_then_units_line_and_comments(tmp_path):
    rows = files.regular_rows(1000, 1000.0)
    body = "\n".join(f"{t:.3f},{v:.3f}" for t, v in rows)
    path = tmp_path / "two_lines.csv"
    path.write_text(f"# cell 7, baseline\ntime,Vm\ns,mV\n{body}\n")
    rec = open_recording(path)
    assert rec.channels[0].name == "Vm" and rec.units(0) == "mV"
    assert rec.sampling_rate_hz == pytest.approx(1000.0)


def test_current_column_keeps_its_units(tmp_path):
    rows = files.regular_rows(1000)
    path = files.write_text(tmp_path / "vc.csv", "time_s,Im_pA", rows)
    rec = open_recording(path)
    assert rec.units(0) == "pA" and rec.channels[0].clamp_mode == "voltage clamp"


def test_start_time_kept(tmp_path):
    rows = files.regular_rows(1000)
    rows[:, 0] += 12.5
    rec = open_recording(files.write_text(tmp_path / "later.csv", "time_s,Vm_mV", rows, fmt="%.5f"))
    assert rec.sweep_starts_s == (pytest.approx(12.5),)


@pytest.mark.parametrize(
    "header, edit, message",
    [
        ("time_s,Vm_mV", lambda lines: lines.__setitem__(40, "0.0039,abc"), r"line 41, column 2 holds 'abc'"),
        ("time_s,Vm_mV", lambda lines: lines.__setitem__(9, "0.0008,"), r"line 10, column 2 is empty"),
        ("time_s;Vm_mV", lambda lines: lines.__setitem__(5, "0.0004;-60,5"), r"decimal commas"),
        ("time_s,Vm_mV", lambda lines: lines.__setitem__(7, "0.0006"), r"line 8 has 1 cell\(s\) where the header names 2"),
        ("time_s,Vm_mV", lambda lines: lines.__setitem__(30, "0.0029,nan"), r"1 NaN or Inf value\(s\) in column 'Vm_mV', first at line 31"),
        ("time_s,Vm_mV", lambda lines: lines.__setitem__(12, "0.0011,inf"), r"first at line 13"),
        ("time_s,Vm_mV", lambda lines: lines.__delitem__(slice(400, 410)), r"sampling is irregular.*step by 1.1 ms at line 401 .*tolerance 1%"),
        ("time_s,Vm", None, r"column 'Vm' has no units"),
        ("Vm_mV,Im_pA", None, r"no time column"),
        ("time_s", None, r"no channels"),
    ],
)
def test_bad_text_is_refused_with_its_line(tmp_path, header, edit, message):
    rows = files.regular_rows(1000, 10_000.0)
    delimiter = ";" if ";" in header else ","
    cells = [f"{t:.4f}{delimiter}{v:.3f}" for t, v in rows] if "," in header or ";" in header else [f"{t:.4f}" for t, _ in rows]
    lines = [header] + cells
    if edit:
        edit(lines)
    path = tmp_path / "bad.csv"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(RecordingError, match=message) as info:
        open_recording(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)


def test_no_header_and_too_few_samples(tmp_path):
    path = tmp_path / "bare.csv"
    path.write_text("\n".join(f"{t:.4f},{v:.2f}" for t, v in files.regular_rows(500)) + "\n")
    with pytest.raises(RecordingError, match="no header line"):
        open_recording(path)
    short = files.write_text(tmp_path / "short.csv", "time_s,Vm_mV", files.regular_rows(60))
    with pytest.raises(RecordingError, match="only 60 samples"):
        open_recording(short)


def test_binary_content_is_not_text(tmp_path):
    path = tmp_path / "binary.csv"
    path.write_bytes(b"time_s,Vm_mV\n\x00\x01\x02" * 50)
    with pytest.raises(RecordingError, match="not a text file"):
        open_recording(path)
    assert not sniff(b"\x00\x01ABF") and sniff(b"time_s,Vm_mV\n0,1\n")


def test_timebase_tolerance():
    t = np.arange(1000) / 1000.0
    jitter = t.copy()
    jitter[500] += 0.009e-3  # 0.9 % of the interval: inside the stated 1 %
    assert rate_from_times(jitter, "x") == pytest.approx(1000.0)
    jitter[500] += 0.002e-3  # 1.1 %: outside
    with pytest.raises(RecordingError, match="irregular.*sample 500"):
        rate_from_times(jitter, "x")
    drift = np.arange(1000) ** 1.002 / 1000.0  # every step a little longer: no gap, but a drift
    with pytest.raises(RecordingError, match="stray from an even"):
        rate_from_times(drift, "x")
    # Times printed with 4 decimals of s cannot carry a 20 kHz grid (0.05 ms steps).
    coarse = np.round(np.arange(1000) / 20_000.0, 4)
    with pytest.raises(RecordingError, match="too coarsely"):
        rate_from_times(coarse, "x", resolution_s=1e-4)
    # Whole milliseconds at 1 kHz are exact, not coarse.
    assert rate_from_times(np.arange(1000) * 1e-3, "x", resolution_s=1e-3) == pytest.approx(1000.0)


def test_windows_export_with_bom_and_crlf(tmp_path):
    rows = files.regular_rows(1000, 10_000.0)
    body = "\r\n".join(f"{t * 1e3:.1f}\t{v:.3f}" for t, v in rows)
    path = tmp_path / "excel.txt"
    path.write_bytes(("\ufeff# Zelle 3, µ-Elektrode\r\nZeit (ms)\tVm (mV)\r\n").encode("utf-8")
                     + body.encode() + b"\r\n")
    rec = open_recording(path)
    assert rec.channels[0].name == "Vm" and rec.sampling_rate_hz == pytest.approx(10_000.0)
    np.testing.assert_allclose(rec.sweep(0), rows[:, 1], atol=5e-4)  # the 3 decimals written


@pytest.mark.parametrize(
    "label, expected",
    [
        # Units of current density and unknown units stay with their column (common practice
        # for column headers, no source): the column is kept, not analysed.
        ("Current (pA/pF)", ("Current", "pA/pF")), ("Im (A/F)", ("Im", "A/F")), ("I (nA)", ("I", "nA")),
        ("Stim (a.u.)", ("Stim", "a.u.")),
    ],
)
def test_header_labels_with_current_densities_and_unknown_units(label, expected):
    assert parse_label(label) == expected


def test_columns_that_are_not_a_voltage_are_kept_as_auxiliary_channels(tmp_path):
    rows = files.regular_rows(2000, 10_000.0)
    table = np.c_[rows[:, 0], rows[:, 1] * 1e-3, rows[:, 1] * 0.0, rows[:, 1] * 0.5, rows[:, 1] * 2.0]
    path = files.write_text(tmp_path / "cell.csv", "Time (s),Voltage (V),Current (pA/pF),Stim (a.u.),Sync",
                            table, fmt="%.9f")
    rec = open_recording(path)
    # The voltage in V is shown in mV (SI prefixes); the others keep their units as written.
    assert [(c.name, c.units) for c in rec.channels] == [
        ("Voltage", "mV"), ("Current", "pA/pF"), ("Stim", "a.u."), ("Sync", "")]
    assert [c.clamp_mode for c in rec.channels][:2] == ["current clamp", "voltage clamp"]
    np.testing.assert_allclose(rec.sweep(0, 0), rows[:, 1], atol=1e-6)
    np.testing.assert_allclose(rec.sweep(0, "Stim"), rows[:, 1] * 0.5, atol=1e-9)


def test_a_file_with_no_voltage_column_is_refused_without_guessing_a_unit(tmp_path):
    rows = files.regular_rows(1000, 10_000.0)
    path = files.write_text(tmp_path / "cell.csv", "time_s,Current (pA/pF),Signal", np.c_[rows, rows[:, 1]])
    with pytest.raises(RecordingError, match=r"column 'Signal' has no units, and no column is a voltage") as info:
        open_recording(path)
    assert "'Signal (mV)'" not in str(info.value) and "'Current (pA/pF) (mV)'" not in str(info.value)
