"""docs/measurements.md is generated from the feature registry, the settings and the flags."""

from __future__ import annotations

from pathlib import Path

from analysis import docs_measurements

from analysis.beats import _features as measure

from analysis.settings import _settings as settings
from analysis.flags import EVENT_FLAGS
from analysis.table import CSV_COLUMNS

PAGE = Path(__file__).resolve().parents[2] / "docs" / "measurements.md"


def test_the_committed_page_is_the_generated_one():
    assert PAGE.read_text(encoding="utf-8") == docs_measurements.render(), (
        "docs/measurements.md is out of date: run `python -m analysis.docs_measurements > docs/measurements.md`"
    )


def test_every_column_feature_and_setting_is_on_the_page_with_its_source():
    page = docs_measurements.render()
    for name in CSV_COLUMNS:
        assert f"| `{name}` |" in page
    for feature in measure.FEATURES.values():
        row = next(line for line in page.splitlines() if line.startswith(f"| `{feature.name}` |"))
        assert row.rstrip().endswith(f"| {feature.source} |")
    for info in settings.describe():
        row = next(line for line in page.splitlines() if line.startswith(f"| `{info.path}` |"))
        assert info.source.replace("|", "\\|") in row and info.doc.replace("|", "\\|") in row


def test_every_flag_word_has_a_meaning():
    vocab = docs_measurements.flag_vocabulary()
    assert list(vocab) == [*measure.FLAG_WORDS, *EVENT_FLAGS]
    assert all(len(meaning.split()) >= 3 for meaning in vocab.values())
    # The definition list ends where the events docstring's prose resumes.
    assert not any("Rejections set" in meaning for meaning in vocab.values())
    page = docs_measurements.render()
    for word in vocab:
        assert f"| `{word}` |" in page
