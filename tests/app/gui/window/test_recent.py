"""Recent files live in the app's folder (UPSTROKE_CONFIG_DIR in tests), newest first, once each."""

from __future__ import annotations

import os

from app.gui.window.recent import MAX_RECENT, RecentFiles, config_dir


def test_config_dir_follows_the_environment(tmp_path, monkeypatch):
    monkeypatch.setenv("UPSTROKE_CONFIG_DIR", str(tmp_path / "cfg"))
    assert config_dir() == tmp_path / "cfg" and (tmp_path / "cfg").is_dir()


def test_newest_first_once_each_and_capped(tmp_path):
    files = [tmp_path / f"cell-{i}.abf" for i in range(MAX_RECENT + 3)]
    for f in files:
        f.write_bytes(b"x")
    recent = RecentFiles(tmp_path)
    for f in files:
        recent.add(f)
    recent.add(files[2])
    items = recent.load()
    assert items[0] == str(files[2].resolve()) and len(items) == MAX_RECENT
    assert len(set(items)) == len(items)
    os.remove(files[-1])
    assert str(files[-1].resolve()) not in recent.existing()


def test_a_damaged_list_reads_as_empty(tmp_path):
    (tmp_path / "recent.json").write_text("{not json")
    assert RecentFiles(tmp_path).load() == []
