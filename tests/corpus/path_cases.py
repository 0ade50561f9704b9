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
    return cases
