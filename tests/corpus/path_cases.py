"""Paths that are not a readable recording: a folder, nothing, an empty or unknown file, a file
the user may not read."""

from __future__ import annotations

from pathlib import Path

from .make_corpus import Case


def build(folder: Path) -> list[Case]:
    """The path cases, written into ``folder``."""
    cases = []
    sub = folder / "a-folder.abf"
    sub.mkdir(exist_ok=True)
    cases.append(Case("path-is-a-folder", (sub,), ("info", str(sub)), sub, r"is a folder",
                      "a folder named like a recording"))
    missing = folder / "not-there.abf"
    cases.append(Case("path-missing", (), ("info", str(missing)), missing, r"no such file",
                      "a path where no file is"))
    loop_a, loop_b = folder / "loop-a.abf", folder / "loop-b.abf"
    for link, target in ((loop_a, loop_b.name), (loop_b, loop_a.name)):
        if not link.is_symlink():
            link.symlink_to(target)
    cases.append(Case("path-symlink-loop", (), ("info", str(loop_a)), loop_a, r"loop of symbolic links",
                      "two symbolic links pointing at each other (ELOOP, not a missing file)"))
    dangling = folder / "dangling.abf"
    if not dangling.is_symlink():
        dangling.symlink_to("moved-away.abf")
    cases.append(Case("path-dangling-symlink", (), ("analyze", str(dangling)), dangling,
                      r"symbolic link to 'moved-away\.abf', which does not exist",
                      "a symbolic link whose recording was moved"))
    empty = folder / "empty.abf"
    empty.write_bytes(b"")
    cases.append(Case("path-empty-file", (empty,), ("info", str(empty)), empty, r"empty",
                      "a recording of 0 bytes (a copy that never finished)"))
    unknown = folder / "scope-trace.xyz"
    unknown.write_bytes(bytes(range(256)) * 8)
    cases.append(Case("path-unknown-format", (unknown,), ("info", str(unknown)), unknown,
                      r"unsupported file type", "binary content with an extension no reader claims"))
    locked = folder / "locked.csv"
    locked.write_text("time_s,Vm_mV\n" + "".join(f"{i / 1e4:.4f},-60\n" for i in range(500)))
    cases.append(Case("path-unreadable", (locked,), ("info", str(locked)), locked,
                      r"cannot be read|permission", "a file the user has no permission to read",
                      fault="unreadable"))
    return cases + save_cases(folder)


def _cut_abf(folder: Path) -> Path:
    from .settings_cases import good_recording

    path = folder / "cut.abf"
    path.write_bytes(good_recording(folder).read_bytes()[:3000])
    return path


def _bad_settings(folder: Path) -> Path:
    path = folder / "nan-settings.toml"
    path.write_text("[detection]\nsmoothing_ms = nan\n", encoding="utf-8")
    return path


def save_cases(folder: Path) -> list[Case]:
    """Outputs that cannot be written: a folder, a missing folder, a full disk, a damaged target."""
    from .results_cases import good_results
    from .settings_cases import good_recording

    rec = good_recording(folder)
    good = good_results(folder)
    kept_h5 = folder / "previous-results.h5"
    kept_h5.write_bytes(good.read_bytes())
    kept_csv = folder / "previous-beats.csv"
    kept_csv.write_text("file,sweep,beat\nprevious,0,0\n", encoding="utf-8")
    damaged = folder / "damaged-results.h5"
    damaged.write_bytes(good.read_bytes()[:3000])
    out_dir = folder / "an-output-folder.h5"
    out_dir.mkdir(exist_ok=True)
    new_csv = folder / "new-beats.csv"  # no case may leave it behind
    nowhere = folder / "no-such-folder" / "results.h5"
    cases = [
        Case("save-out-is-a-folder", (rec,), ("analyze", str(rec), "--out", str(out_dir), "--csv", str(new_csv)),
             out_dir, r"is a folder", "--out names a folder", outputs=(new_csv,)),
        Case("save-out-folder-missing", (rec,), ("analyze", str(rec), "--out", str(nowhere), "--csv", str(new_csv)),
             nowhere, r"folder does not exist", "--out in a folder that does not exist", outputs=(new_csv, nowhere)),
        Case("save-out-is-the-recording", (rec,), ("analyze", str(rec), "--csv", str(rec)), rec,
             r"is one of the recordings|is the recording|input", "--csv would overwrite the recording", keep=(rec,)),
        Case("save-out-damaged", (damaged,), ("analyze", str(rec), "--out", str(damaged), "--csv", str(new_csv)),
             damaged, r"not a readable HDF5|damaged|truncated",
             "--out names a damaged results file: it must be left as it is, not replaced",
             outputs=(new_csv,), keep=(damaged,)),
        Case("save-disk-full-results", (kept_h5,),
             ("analyze", str(rec), "--out", str(kept_h5), "--csv", str(new_csv)), kept_h5,
             r"no space|disk is full|full", "the disk fills while the results file is saved",
             outputs=(new_csv,), keep=(kept_h5,), fault="enospc"),
        Case("save-disk-full-csv", (kept_csv,), ("analyze", str(rec), "--csv", str(kept_csv)), kept_csv,
             r"no space|disk is full|full", "the disk fills while the beats CSV is written",
             keep=(kept_csv,), fault="enospc"),
        Case("save-disk-full-export", (good, kept_csv), ("export", str(good), "--csv", str(kept_csv)), kept_csv,
             r"no space|disk is full|full", "the disk fills while export writes the CSV",
             keep=(kept_csv, good), fault="enospc"),
        Case("batch-folder-missing", (), ("batch", str(folder / "no-such-study"), "--out", str(folder / "batch.h5"), "--quiet"),
             folder / "no-such-study", r"no such file or folder", "batch over a folder that is not there",
             outputs=(folder / "batch.h5",)),
        Case("batch-out-damaged", (damaged,), ("batch", str(rec), "--out", str(damaged), "--quiet"), damaged,
             r"not a readable HDF5|damaged|truncated", "batch adding to a damaged results file: left as it is",
             keep=(damaged,)),
        Case("batch-bad-settings", (rec,), ("batch", str(rec), "--out", str(folder / "batch.h5"), "--quiet",
                                            "--settings", str(_bad_settings(folder))),
             _bad_settings(folder), r"not a finite number", "batch with a settings file holding nan",
             outputs=(folder / "batch.h5",)),
        Case("gui-damaged-recording", (damaged,), ("gui", str(folder / "cut.abf"), "--screenshot", str(folder / "shot.png")),
             _cut_abf(folder), r"corrupt|past the end|cut short", "the desktop app given a damaged recording",
             outputs=(folder / "shot.png",), tags=("subprocess",)),
        Case("gui-damaged-results", (damaged,), ("gui", str(damaged), "--screenshot", str(folder / "shot.png")),
             damaged, r"not a readable HDF5|damaged|truncated", "the desktop app given a damaged results file",
             outputs=(folder / "shot.png",), keep=(damaged,), tags=("subprocess",)),
        Case("save-export-folder-missing", (good,), ("export", str(good), "--csv", str(folder / "nowhere" / "b.csv")),
             folder / "nowhere" / "b.csv", r"folder does not exist", "export into a folder that does not exist"),
    ]
    return cases
