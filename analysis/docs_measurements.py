"""The measurements page (docs/measurements.md), generated from the code that measures.

Run ``python -m analysis.docs_measurements > docs/measurements.md`` after changing a feature, a
setting or a flag; a test fails while the committed page and the code disagree.

Every part of the page comes from one place in the core, so that the page cannot say something the
code does not do:

* the beats CSV's columns: the catalogue :mod:`analysis.columns` (name, unit, the one
  description, the published source);
* how each marker is found: the docstrings of :mod:`analysis.beats._markers` and :mod:`analysis.signal._filters`;
* how beats are found: the docstring of :mod:`analysis.beats._detect`;
* the flags: :data:`analysis.beats.FLAG_WORDS` and the vocabulary in the docstring of
  :mod:`analysis.flags._events`, with the automatic rejections of the default quality settings;
* rhythm and variability: the docstring of :mod:`analysis.stats._variability`;
* the ensemble beat: the docstring of :mod:`analysis.stats._ensemble`; the phase plane's
  derivative is described here (:func:`analysis.beats.derivative_trace`);
* every setting: :func:`analysis.settings.describe` (unit, default, bounds or choices, what it
  does, its source).
"""

from __future__ import annotations

import inspect
import re
import sys
from types import ModuleType

import analysis.columns as columns
import analysis.settings as settings
from analysis.beats import FIRST_BEAT_FALL_MV, FLAG_WORDS
from analysis.flags import EVENT_FLAGS, rejection_flags

# The modules whose docstrings the page renders (the definitions live beside their code).
from analysis.beats import _detect as detect
from analysis.beats import _markers as markers
from analysis.flags import _events as events
from analysis.signal import _filters as signal
from analysis.stats import _ensemble as ensemble
from analysis.stats import _variability as variability

__all__ = ["flag_vocabulary", "render"]

_ROLE = re.compile(r":(?:func|mod|class|data|meth|attr):`~?([^`]+)`")


def _md(text: str) -> str:
    """Docstring text as Markdown: Sphinx roles become code spans."""
    return _ROLE.sub(lambda m: f"`{m.group(1)}`", text)


def _body(module: ModuleType) -> str:
    """A module docstring without its one-line summary."""
    doc = inspect.getdoc(module) or ""
    return doc.split("\n\n", 1)[1].strip() if "\n\n" in doc else ""


def _section(doc: str, title: str) -> str:
    """The text under a numpydoc heading (``title`` over a line of dashes) up to the next one."""
    lines = doc.splitlines()
    for i in range(len(lines) - 1):
        if lines[i].strip() == title and set(lines[i + 1].strip()) == {"-"}:
            out = []
            for j in range(i + 2, len(lines)):
                if j + 1 < len(lines) and lines[j].strip() and set(lines[j + 1].strip()) == {"-"}:
                    break
                out.append(lines[j])
            return "\n".join(out).strip()
    raise LookupError(f"no section {title!r}")


def _cell(text: object) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def flag_vocabulary() -> dict[str, str]:
    """Every word of the ``flags`` column with its meaning, in the order they are written.

    The structural flags come from :data:`analysis.beats.FLAG_WORDS`, the event and quality
    flags from the vocabulary in :mod:`analysis.flags._events`' docstring (a definition list: the word
    on its own line, its meaning indented below).
    """
    out = dict(FLAG_WORDS)
    vocab = _section(inspect.getdoc(events) or "", _vocabulary_title())
    word, meaning = None, []
    for line in vocab.splitlines():
        if line and not line[0].isspace():
            if word is not None:
                out[word] = " ".join(meaning)
            if " " in line.strip():
                word = None
                break  # an unindented paragraph: the definition list is over
            word, meaning = line.strip(), []
        elif line.strip() and word is not None:
            meaning.append(line.strip())
    if word is not None:
        out[word] = " ".join(meaning)
    missing = [w for w in EVENT_FLAGS if w not in out]
    if missing:
        raise LookupError(f"analysis.flags._events documents no meaning for {missing}")
    return {w: out[w] for w in (*FLAG_WORDS, *EVENT_FLAGS)}


def _vocabulary_title() -> str:
    doc = inspect.getdoc(events) or ""
    for line in doc.splitlines():
        if line.startswith("Vocabulary"):
            return line.strip()
    raise LookupError("analysis.flags._events has no Vocabulary section")


def _columns() -> list[str]:
    rows = ["| column | unit | definition (default) | source |", "|---|---|---|---|"]
    for col in (*columns.csv_columns(), *columns.review_csv_columns()):
        unit = f"{col.unit} " if col.unit else ""
        rows.append(f"| `{col.name}` | {unit}| {_cell(col.description)} | {_cell(col.source)} |")
    return rows


def _flags() -> list[str]:
    quality = settings.QualitySettings()
    auto = set(rejection_flags(quality))
    held = set(quality.review_flags)
    rows = ["| flag | meaning | rejected automatically by default | held for review by default |", "|---|---|---|---|"]
    for word, meaning in flag_vocabulary().items():
        rule = "yes" if word in auto else ("never" if word == "no_overshoot" else "no")
        if word in FLAG_WORDS:
            rule = "no (left out of summaries)"
        review = ("yes" if word not in auto else "yes, when not rejected") if word in held else "no"
        rows.append(f"| `{word}` | {_cell(_md(meaning))} | {rule} | {review} |")
    return rows


def _allowed(info: settings.FieldInfo) -> str:
    if info.choices:
        words = ", ".join(f"`{c}`" for c in info.choices)
        return f"any of {words} (the flag vocabulary)" if info.kind == "text list" else f"one of {words}"
    if info.kind == "bool":
        return "true or false"
    return settings.range_text(info.min, info.max)


def _default(info: settings.FieldInfo) -> str:
    value = info.default
    if value is None:
        return "unset"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, tuple):
        return "[" + ", ".join(f"`{v}`" if isinstance(v, str) else f"{v:g}" for v in value) + "]"
    if isinstance(value, float):
        return f"{value:g}"
    return f"`{value}`" if isinstance(value, str) else str(value)


def _settings() -> list[str]:
    out: list[str] = []
    by_section: dict[str, list[settings.FieldInfo]] = {}
    for info in settings.describe():
        by_section.setdefault(info.section, []).append(info)
    for key, infos in by_section.items():
        cls = settings.Settings.sections()[key]
        out += ["", f"### `[{key}]`: {_md((inspect.getdoc(cls) or '').splitlines()[0])}", ""]
        out += ["| setting | default | unit | allowed | what it does | source |", "|---|---|---|---|---|---|"]
        for info in infos:
            out.append(
                f"| `{info.path}` | {_default(info)} | {info.unit} | {_allowed(info)} | {_cell(info.doc)} | "
                f"{_cell(info.source)} |"
            )
    return out


def render() -> str:
    """The whole page, as Markdown."""
    marker_doc = _md(_body(markers))
    parts = [
        "# Measurements: every definition and its source",
        "",
        "Generated from the code by `python -m analysis.docs_measurements`; a test keeps this page and",
        "the code in step. Defaults follow the project's measurement specification; every alternative is",
        "a setting, stored with the results (`[section]` tables of a settings TOML file, or the",
        "Definitions tab of the app). Voltages are after the liquid-junction-potential correction",
        "(V_true = V_measured - LJP; Barry & Lynch 1991, J Membr Biol 121:101; Neher 1992, Methods",
        "Enzymol 207:123). Times are seconds from the start of the sweep, interpolated linearly between",
        "samples where a level is crossed. A source marked \"from memory\" is to be verified before it is",
        "quoted as a fact; \"common practice, no source\" means just that.",
        "",
        "Upstroke is a research tool, not a medical device; its output is not for diagnosing or",
        "treating anyone.",
        "",
        "## The beats CSV's columns",
        "",
        "The contract's columns come first, in the contract's order (CONTRACT.md), then the review's:",
        "`" + "`, `".join(c.name for c in columns.review_csv_columns()) + "`. The review's columns keep their",
        "names and order from one release to the next; new columns go after them. The command line",
        "(`analyze`, `batch`, `export`) and the app write the same columns with the same values.",
        "Undefined values are empty cells. The first beat of a sweep is measured from the diastole",
        "recorded before it when the sweep holds the previous beat's repolarisation falling at least",
        f"{FIRST_BEAT_FALL_MV:g} mV (or 10 x the noise rms) into a minimum two MDP windows or more from the",
        "sweep's start and from the upstroke (common practice, no source); its CL stays empty (no",
        "previous upstroke). Otherwise it has no diastole before it: its MDP, TOP, DDR, APA, APDs and CL",
        "are empty and it carries `no_diastole`. A beat without phase-4 depolarisation above the noise",
        "(flag `no_phase4`: a paced or evoked action potential, a driven quiescent cell, a neuron-like",
        "spike) has no TOP, DDR or DDR100.",
        "",
        *_columns(),
        "",
        "## How each marker is found",
        "",
        marker_doc,
        "",
        "### Derivatives",
        "",
        _md(_body(signal)),
        "",
        "## How beats are found",
        "",
        _md(_body(detect)),
        "",
        "## Flags",
        "",
        "The `flags` column holds `;`-separated words from this vocabulary, in this order. Flags are",
        "suggestions the reviewer confirms; only the rules marked here reject beats without review",
        "(each `quality.reject_FLAG` setting switches one on or off). A rejection sets `accepted` to 0",
        f"and says why (`{events.AUTO_PREFIX}FLAG (why)`). A beat carrying a flag of the",
        "`quality.review_flags` setting (by default those marked here: each says a value may be wrong)",
        "and not rejected is held for review: its `verdict` is `to_review`, its `accepted` 0, and the",
        "summaries leave it out and count it (`n_to_review`) until the user accepts or rejects it.",
        "Physiological flags (`ead`, `dad`, `pause`) keep the beat in and are counted. Summaries also",
        "leave out rejected beats and those flagged `no_diastole` or `truncated`.",
        "",
        *_flags(),
        "",
        "## Rhythm and variability",
        "",
        _md(_section(inspect.getdoc(variability) or "", "Definitions")),
        "",
        "## The ensemble beat and the phase plane",
        "",
        _md(_body(ensemble)),
        "",
        "The aligned-beats figure draws the same sample-wise median of the beats it shows. The phase",
        "plane (dV/dt against V) is drawn with the estimator that measured dV/dt max",
        "(`analysis.beats.derivative_trace`): the order-3 Savitzky-Golay derivative over the beat's",
        "own dV/dt max window (`dvdt_window_ms`; for an average beat the median of its beats'), not a",
        "first difference, so that the loop's top is the beat's dV/dt max and its diastole is as quiet",
        "as that estimate (Savitzky & Golay 1964, Anal Chem 36:1627; common practice, no source).",
        "",
        "## Settings",
        "",
        "Every setting, by section, as the settings file, the results file and the app name it.",
        *_settings(),
        "",
    ]
    return "\n".join(parts)


def main() -> int:
    sys.stdout.write(render())
    return 0


if __name__ == "__main__":
    sys.exit(main())
