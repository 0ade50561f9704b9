"""The catalogue of beat columns: one record per column of the beat table, said once.

Every column of the beat table is declared here with its name, unit, kind, CSV decimals, the short
label the window and the figures show, the one description the docs and tooltips give, the
published source of its definition, whether the beats CSV carries it and whether the summaries
report its mean and SD. Everything else derives from this table: the CSV's header and order
(:data:`analysis.table.CSV_COLUMNS`), the feature registry's names, units and descriptions
(:data:`analysis.beats.FEATURES` keeps only the compute functions), the summary's parameters
(:data:`analysis.stats.PARAMETERS`), the window's headers, beat card and axis labels, and the
measurements page.

This is a vocabulary module of the core: it imports nothing from the core's tiers.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "KINDS", "BeatColumn", "CATALOGUE", "CSV_APD_PERCENTS", "apd_name", "apd_column", "apd_time_column",
    "FLAG_VOCABULARY", "column", "csv_columns", "review_csv_columns", "summarised_columns",
]

#: What a column is, by kind.
KINDS = {
    "identity": "where the beat is: its recording, sweep and number",
    "measured": "a per-beat value computed by a function of the feature registry",
    "marker": "a time, index or fit value found on the trace with the beat's markers",
    "flag": "words from the flag vocabulary, or the condition the beat falls in",
    "decision": "whether the beat is used, and why not",
}
_DTYPES = ("float", "int", "str")
_MS = "MEASUREMENTS.md"
_CONTRACT = "CONTRACT.md"
_REVIEW = "CONTRACT.md (the review's columns); named by Upstroke"

#: Every word the ``flags`` column may hold, in the order they are written: the structural flags
#: of :data:`analysis.beats.FLAG_WORDS` then the event and quality flags of
#: :data:`analysis.flags.EVENT_FLAGS` (their meanings are documented there). Settings that name
#: flags (``quality.review_flags``) are checked against it.
FLAG_VOCABULARY: tuple[str, ...] = (
    "no_diastole", "no_phase4", "truncated",
    "ead", "dad", "pause", "clipped", "noisy", "mdp_drift", "low_apa", "no_overshoot", "artefact",
)


@dataclass(frozen=True)
class BeatColumn:
    """One column of the beat table.

    Attributes
    ----------
    name : str
        Column name; it ends with its unit (``/`` spelled ``_per_``) where it has one.
    kind : str
        One of :data:`KINDS`.
    dtype : str
        ``"float"``, ``"int"`` or ``"str"``: how the table stores it.
    unit : str
        Unit as shown (``"mV/s"``), empty when it has none.
    decimals : int or None
        Digits after the decimal point in CSV output (floats only).
    label : str
        Short label, as the window's headers, the beat card and the figure axes show it.
    description : str
        The one description, for the measurements page, tooltips and the CSV reference.
    source : str
        Where its definition is published (MEASUREMENTS.md gives the sources; CONTRACT.md for
        columns the contract itself defines); empty when none.
    in_csv : bool
        The beats CSV carries it among the contract's columns (in :data:`CATALOGUE` order).
    review_csv : bool
        The beats CSV carries it after the contract's columns, among the review's columns.
    summarised : bool
        Each summary reports its mean and SD (and the ensemble beat's value).
    """

    name: str
    kind: str
    dtype: str
    unit: str = ""
    decimals: int | None = None
    label: str = ""
    description: str = ""
    source: str = ""
    in_csv: bool = False
    summarised: bool = False
    review_csv: bool = False

    def __post_init__(self) -> None:
        if self.kind not in KINDS or self.dtype not in _DTYPES:
            raise ValueError(f"column {self.name!r}: kind {self.kind!r} or dtype {self.dtype!r} unknown")
        if self.unit and not self.name.endswith("_" + self.unit_in_name):
            raise ValueError(f"column {self.name!r} does not end with its unit {self.unit_in_name!r}")
        if self.decimals is not None and self.dtype != "float":
            raise ValueError(f"column {self.name!r}: decimals are for float columns")
        if self.summarised and not (self.unit and self.dtype == "float"):
            raise ValueError(f"column {self.name!r}: only float columns with a unit are summarised")

    @property
    def unit_in_name(self) -> str:
        """The unit as the name spells it: ``mV_per_s`` for mV/s."""
        return self.unit.replace("/", "_per_")

    @property
    def stem(self) -> str:
        """The name without its unit (``apd90`` for ``apd90_ms``), as summary columns use it."""
        return self.name[: -len(self.unit_in_name) - 1] if self.unit else self.name

    @property
    def header(self) -> str:
        """The window's column header: the label, its unit in brackets below it."""
        return f"{self.label}\n({self.unit})" if self.unit else self.label

    @property
    def axis_label(self) -> str:
        """A figure axis's or a summary row's label: ``APD90 (ms)``."""
        return f"{self.label} ({self.unit})" if self.unit else self.label


def apd_name(percent: float) -> str:
    """``apd90`` for 90, ``apd12p5`` for 12.5."""
    text = f"{percent:g}".replace(".", "p")
    return f"apd{text}"


#: The APD percentages the beats CSV always carries (NaN when the settings leave one out).
CSV_APD_PERCENTS = (20.0, 50.0, 90.0)


def apd_column(percent: float) -> BeatColumn:
    """The APD column of one repolarisation percentage (any percentage the settings ask for)."""
    in_csv = float(percent) in CSV_APD_PERCENTS
    return BeatColumn(
        f"{apd_name(percent)}_ms", "measured", "float", "ms", 3, f"APD{percent:g}",
        f"AP duration from the reference time to {percent:g} % repolarisation (V <= peak - {percent:g} % of APA)",
        _MS, in_csv=in_csv, summarised=in_csv,
    )


def apd_time_column(percent: float) -> BeatColumn:
    """The time of one APD level crossing (the marker the APD is measured to)."""
    return BeatColumn(
        f"t_{apd_name(percent)}_s", "marker", "float", "s", None, f"APD{percent:g} time",
        f"time V first falls to {percent:g} % repolarisation after the peak, from the sweep's start", _MS,
    )


def _m(name: str, unit: str, label: str, description: str, source: str = _MS, *, summarised: bool = True) -> BeatColumn:
    """A measured column of the CSV."""
    return BeatColumn(name, "measured", "float", unit, 3, label, description, source, in_csv=True, summarised=summarised)


def _marker(name: str, unit: str, label: str, description: str, dtype: str = "float") -> BeatColumn:
    """A marker column kept in the table, left out of the CSV."""
    return BeatColumn(name, "marker", dtype, unit, None, label, description, _MS)


#: Every declared column of the beat table: the beats CSV's first, in the contract's order.
CATALOGUE: tuple[BeatColumn, ...] = (
    BeatColumn("file", "identity", "str", label="file", in_csv=True, source=_CONTRACT,
               description="the recording, as given on the command line or stored"),
    BeatColumn("sweep", "identity", "int", label="sweep", in_csv=True, source=_CONTRACT,
               description="sweep number, from 0"),
    BeatColumn("beat", "identity", "int", label="beat", in_csv=True, source=_CONTRACT,
               description="beat number within its sweep, from 0"),
    BeatColumn("t_upstroke_s", "measured", "float", "s", 6, "upstroke",
               "upstroke time (dV/dt max, or a voltage-level crossing) from the sweep's start", _MS, in_csv=True),
    BeatColumn("accepted", "decision", "int", label="kept", in_csv=True, source=_CONTRACT,
               description="1 when the summaries use the beat; 0 when it is rejected (by review or a quality rule) "
               "or waits for review"),
    BeatColumn("flags", "flag", "str", label="flags", in_csv=True, source=_CONTRACT,
               description="';'-separated flag words, empty when none"),
    BeatColumn("condition", "flag", "str", label="condition", in_csv=True, source=_CONTRACT,
               description="the condition the beat falls in, empty when none"),
    _m("cl_ms", "ms", "CL", "cycle length: this upstroke minus the previous one in the same sweep"),
    _m("rate_bpm", "bpm", "rate", "beating rate, 60000 / cycle length"),
    _m("mdp_mV", "mV", "MDP", "maximum diastolic potential: minimum V between the previous peak and the upstroke"),
    _m("top_mV", "mV", "TOP", "take-off potential (default: V where dV/dt last rises through 0.5 V/s)"),
    _m("ddr_mV_per_s", "mV/s", "DDR", "diastolic depolarisation rate: least-squares slope of V from MDP to TOP"),
    _m("ddr100_mV_per_s", "mV/s", "DDR100", "early DDR: least-squares slope over the first 100 ms after the MDP",
       "Verkerk et al. 2007, Eur Heart J 28:2472"),
    _m("dvdt_max_V_per_s", "V/s", "dV/dt max",
       "maximum upstroke velocity (Savitzky-Golay derivative sized to the upstroke)"),
    _m("peak_mV", "mV", "peak", "peak potential: maximum V after the upstroke, before the next diastole"),
    _m("apa_mV", "mV", "APA", "action-potential amplitude, peak - MDP"),
    *(apd_column(p) for p in CSV_APD_PERCENTS),
    BeatColumn("verdict", "decision", "str", label="verdict", review_csv=True, source=_REVIEW,
               description="accepted, rejected, or to_review: a flag of the quality.review_flags setting holds "
               "the beat out of the summaries until the user accepts or rejects it"),
    BeatColumn("reject_reason", "decision", "str", label="reason", review_csv=True, source=_REVIEW,
               description="why the beat is rejected: 'auto: FLAG (why)' for a quality rule, else the reviewer's "
               "words; empty unless rejected"),
    BeatColumn("decided_by", "decision", "str", label="decided by", review_csv=True, source=_REVIEW,
               description="auto (the quality rules, which also hold beats for review) or user (a review decision)"),
    BeatColumn("recording_id", "identity", "str", label="recording id", review_csv=True, source=_REVIEW,
               description="the first 16 hex digits of the recording file's SHA-256: the same whichever "
               "front end wrote the CSV and wherever the file lies; empty for data not read from a file"),
    _marker("i_upstroke", "", "upstroke sample", "sample index of the upstroke in its sweep", dtype="int"),
    _marker("t_mdp_s", "s", "MDP time", "time of the MDP, from the sweep's start"),
    _marker("t_top_s", "s", "TOP time", "time of the take-off, from the sweep's start"),
    _marker("t_peak_s", "s", "peak time", "time of the peak, from the sweep's start"),
    *(apd_time_column(p) for p in CSV_APD_PERCENTS),
    _marker("rise_ms", "ms", "rise", "10-90 % rise time of the upstroke, which sizes the dV/dt max window"),
    _marker("dvdt_window_ms", "ms", "dV/dt window", "length of the Savitzky-Golay window that measured dV/dt max"),
    _marker("dvdt_max_sd_V_per_s", "V/s", "dV/dt max SD",
            "standard uncertainty of dV/dt max from the trace's white noise (0 on a clean trace)"),
    _marker("dvdt_peak_width_ms", "ms", "dV/dt peak width",
            "full width of the dV/dt peak at half its height, which caps the dV/dt max window"),
    _marker("ddr_early_mV_per_s", "mV/s", "early DDR",
            "least-squares slope of V from the MDP to phase 4's inflection (early/late DDR setting)"),
    _marker("ddr_late_mV_per_s", "mV/s", "late DDR",
            "least-squares slope of V from phase 4's inflection to the TOP (early/late DDR setting)"),
    _marker("ddr_tau_ms", "ms", "DDR tau", "time constant of the exponential fit V(t) = Vinf - A exp(-t/tau) to phase 4"),
    _marker("ddr_vinf_mV", "mV", "DDR Vinf", "asymptote Vinf of the exponential fit to phase 4"),
)
_BY_NAME = {c.name: c for c in CATALOGUE}
if len(_BY_NAME) != len(CATALOGUE):
    raise ValueError("a column is declared twice in the catalogue")


def column(name: str) -> BeatColumn:
    """The catalogue's record of a column; APD columns of any percentage are known too."""
    try:
        return _BY_NAME[name]
    except KeyError:
        pass
    for make, prefix, suffix in ((apd_column, "apd", "_ms"), (apd_time_column, "t_apd", "_s")):
        if name.startswith(prefix) and name.endswith(suffix):
            text = name[len(prefix): -len(suffix)].replace("p", ".")
            try:
                made = make(float(text))
            except ValueError:
                break
            if made.name == name:
                return made
    raise KeyError(f"the catalogue of beat columns has no column {name!r}")


def csv_columns() -> tuple[BeatColumn, ...]:
    """The beats CSV's columns, in its order."""
    return tuple(c for c in CATALOGUE if c.in_csv)


def review_csv_columns() -> tuple[BeatColumn, ...]:
    """The review's columns the beats CSV writes after the contract's, in its order."""
    return tuple(c for c in CATALOGUE if c.review_csv)


def summarised_columns() -> tuple[BeatColumn, ...]:
    """The columns each summary reports, in CSV order."""
    return tuple(c for c in CATALOGUE if c.summarised)
