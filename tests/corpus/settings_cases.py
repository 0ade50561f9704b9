"""Bad settings files (TOML) given to ``upstroke analyze --settings``.

Each case is a good recording (a synthetic current-clamp cell) with a settings file that is wrong
in one way: an unknown section or key, a value out of range, of the wrong type or not finite,
keys that contradict each other, a newer schema, a file that is not TOML, or no readable file.
Nothing may be written: the command also asks for a results file and a beats CSV.
"""

from __future__ import annotations

from pathlib import Path

from .make_corpus import Case


def good_recording(folder: Path) -> Path:
    """A synthetic nodal-like cell, 2 s at 10 kHz, in ABF 1 (pyabf's writer's layout)."""
    from analysis.synthetic import preset, synthesize
    from analysis.synthetic import write_abf

    path = folder / "good-cell.abf"
    if not path.exists():
        write_abf(synthesize(preset("nodal-like"), duration_s=2.0, fs_hz=10_000.0, seed=3).recording, path)
    return path


#: Settings that are valid on their own but not for the recording analysed.
RECORDING_DEPENDENT = ("settings-lowpass-above-nyquist",)


def _sweep_ranges(folder: Path, rec: Path) -> list[Case]:
    """``--sweeps`` ranges far beyond the recording's one sweep: refused before any list is made."""
    cases = []
    # (A batch reports the same line for each file, in its list of failed files.)
    for name, text, command in [
        ("sweeps-range-of-10-to-the-12", "0-999999999999", "analyze"),
        ("sweeps-range-of-50-million", "0-50000000", "analyze"),
    ]:
        out_h5, out_csv = folder / f"{name}.out.h5", folder / f"{name}.out.csv"
        argv = (command, str(rec), "--sweeps", text, "--out", str(out_h5), "--csv", str(out_csv))
        first = text.split("-")[0]
        cases.append(Case(
            name, (rec,), argv, rec, rf"has 1 sweep \(0 to 0\) but --sweeps {text} asks for sweep {max(1, int(first))}",
            f"--sweeps {text} on a recording of one sweep (a list of them would take "
            f"{(int(text.split('-')[1]) + 1) * 28 / 2**30:.0f} GiB)", outputs=(out_h5, out_csv), huge=True,
        ))
    return cases


def build(folder: Path) -> list[Case]:
    """The settings cases, written into ``folder``."""
    rec = good_recording(folder)
    long_text = "x" * 200_000
    specs: list[tuple[str, str | bytes, str, str]] = [
        ("settings-unknown-section", "[detect]\nmin_dvdt_V_per_s = 1.0\n", r"unknown settings section 'detect'",
         "a section name misspelt"),
        ("settings-unknown-key", "[detection]\nthreshold_mV = -20.0\n", r"unknown setting detection\.threshold_mV",
         "a key that does not exist"),
        ("settings-out-of-range", "[detection]\nmin_dvdt_V_per_s = 0.0\n", r"min_dvdt_V_per_s.*out of range",
         "a threshold below its allowed range"),
        ("settings-negative-ljp", "[preprocess]\nljp_mV = -500.0\n", r"ljp_mV.*out of range",
         "an LJP of -500 mV"),
        ("settings-text-for-number", '[detection]\nsmoothing_ms = "fast"\n', r"smoothing_ms.*not a number",
         "text where a number belongs"),
        ("settings-bool-for-number", "[measurement]\ntop_dvdt_V_per_s = true\n", r"top_dvdt_V_per_s.*not a number",
         "true where a number belongs"),
        ("settings-nan", "[detection]\nsmoothing_ms = nan\n", r"not a finite number", "TOML's nan"),
        ("settings-inf", "[preprocess]\nlowpass_hz = inf\n", r"not a finite number|out of range", "TOML's inf"),
        ("settings-bad-choice", '[measurement]\ntop_method = "guess"\n', r"top_method.*not one of the choices",
         "a method that does not exist"),
        ("settings-list-for-number", "[preprocess]\nljp_mV = [1.0, 2.0]\n", r"ljp_mV.*not a number",
         "a list where one number belongs"),
        ("settings-empty-list", "[measurement]\napd_percent = []\n", r"apd_percent.*empty", "no APD levels"),
        ("settings-list-out-of-range", "[measurement]\napd_percent = [50, 150]\n", r"apd_percent.*out of range",
         "an APD150"),
        ("settings-list-repeats", "[measurement]\napd_percent = [50, 50]\n", r"apd_percent.*repeats",
         "APD50 asked twice"),
        ("settings-fraction-for-int", "[preprocess]\nlowpass_order = 2.5\n", r"lowpass_order.*not a whole number",
         "a filter order of 2.5"),
        ("settings-newer-schema", "schema_version = 99\n", r"schema version 99, newer", "settings from a newer version"),
        ("settings-negative-schema", "schema_version = -3\n", r"schema", "a schema version that never existed"),
        ("settings-section-not-table", "detection = 5\n", r"not a table", "a section written as a value"),
        ("settings-not-toml", "[detection\nsmoothing_ms = \n", r"not valid TOML", "a broken TOML line"),
        ("settings-binary", bytes(range(256)) * 4, r"not valid TOML", "binary bytes"),
        ("settings-huge-text-value", f'[measurement]\ntop_method = "{long_text}"\n', r"top_method.*not one of the choices",
         "a 200 000-character value (the error must not quote it whole)"),
        ("settings-fractions-crossed", "[detection]\nlow_fraction = 0.9\nhigh_fraction = 0.5\n",
         r"low_fraction.*high_fraction|high_fraction.*low_fraction",
         "the lower detection level above the upper one"),
        ("settings-windows-crossed", "[measurement]\ndvdt_max_min_window_ms = 20.0\ndvdt_max_max_window_ms = 0.05\n",
         r"dvdt_max_min_window_ms.*dvdt_max_max_window_ms|dvdt_max_max_window_ms.*dvdt_max_min_window_ms",
         "the shortest dV/dt window longer than the longest"),
        ("settings-cell-type-ratios-crossed", "[summary]\nventricular_max_ratio = 2.0\natrial_min_ratio = 1.5\n",
         r"ventricular_max_ratio = 2 is not below summary\.atrial_min_ratio = 1\.5",
         "APD90/APD50 ratios that would call a cell both ventricular-like and atrial-like"),
        ("settings-lowpass-above-nyquist", "[preprocess]\nlowpass_hz = 8000.0\n", r"lowpass_hz.*half the sampling rate",
         "a low-pass corner above the 5 kHz Nyquist frequency of a 10 kHz recording"),
    ]
    cases = []
    for name, content, expect, why in specs:
        path = folder / f"{name}.toml"
        if isinstance(content, str):
            path.write_text(content, encoding="utf-8")
        else:
            path.write_bytes(content)
        out_h5, out_csv = folder / f"{name}.out.h5", folder / f"{name}.out.csv"
        argv = ("analyze", str(rec), "--settings", str(path), "--out", str(out_h5), "--csv", str(out_csv))
        # A setting that only this recording cannot take is blamed on the recording.
        blame = rec if name in RECORDING_DEPENDENT else path
        cases.append(Case(name, (path, rec), argv, blame, expect, why, outputs=(out_h5, out_csv)))
    cases += _sweep_ranges(folder, rec)
    sub = folder / "settings-folder.toml"
    sub.mkdir(exist_ok=True)
    missing = folder / "no-such-settings.toml"
    locked = folder / "locked-settings.toml"
    locked.write_text("[detection]\nsmoothing_ms = 1.0\n", encoding="utf-8")
    for name, path, expect, why, fault in [
        ("settings-is-a-folder", sub, r"is a folder", "a folder given as the settings file", ""),
        ("settings-missing", missing, r"does not exist", "a settings file that is not there", ""),
        ("settings-unreadable", locked, r"cannot read|permission", "a settings file the user may not read", "unreadable"),
    ]:
        out_h5, out_csv = folder / f"{name}.out.h5", folder / f"{name}.out.csv"
        argv = ("analyze", str(rec), "--settings", str(path), "--out", str(out_h5), "--csv", str(out_csv))
        cases.append(Case(name, (rec,), argv, path, expect, why, outputs=(out_h5, out_csv), fault=fault))
    return cases
