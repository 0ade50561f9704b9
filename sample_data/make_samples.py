"""Write Upstroke's demo recordings: invented cells, bit-identical on every run.

    python sample_data/make_samples.py            # rewrites the files beside this script
    python sample_data/make_samples.py OUT_DIR    # writes them into another folder

Every file comes from the scenario of :mod:`app.demo_data` (``analysis.synthetic`` with fixed
seeds). No cell was recorded: the cells NL-0417 and VL-0212 and the compound UP-113 are fictional.

Files
-----
NL-0417_gapfree.abf
    Three minutes gap-free at 10 kHz, ABF1 with int16 samples (``analysis.synthetic.write_abf``).
NL-0417_gapfree.nwb
    The same int16 samples as NWB (one ``CurrentClampSeries``, its ``conversion`` giving volts),
    gzip-compressed.
VL-0212_episodic.abf
    Five consecutive 4 s sweeps at 50 kHz, ABF1 int16.
NL-0417_truth.csv, VL-0212_truth.csv
    The true value of every beat's parameters (the beats CSV's columns), computed on the exact
    waveform by MEASUREMENTS.md's default definitions.
README.md
    The scenario, with the time of every planted event.
MANIFEST.json
    Each file's size and SHA-256, and the versions of the libraries that wrote them.

Determinism
-----------
The ABF files, the truth tables and the README depend only on the seeded synthesis and are
bit-identical on every run. The NWB file is too, for the same versions of pynwb, hdmf, h5py and
HDF5: its identifier, dates and object IDs are fixed here (the object IDs, random UUIDs by
default, are derived from each object's type and name), and h5py stores no timestamps. Other
versions of those libraries may lay the file out differently (the cached NWB schema, HDF5's
metadata, zlib's compression), so ``tests/test_sample_data.py`` compares the NWB file's bytes only
when MANIFEST.json's versions are the running ones; otherwise it compares the decoded samples and
metadata, and checks that two fresh writes are identical.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import os
import sys
import uuid
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # run from a plain checkout, without an install
    sys.path.insert(0, str(HERE.parent))

from analysis import open_recording  # noqa: E402
from analysis.conditions import assign_conditions  # noqa: E402
from analysis.synthetic import write_abf  # noqa: E402
from analysis.table import CSV_COLUMNS, BeatTable  # noqa: E402
from app import demo_data  # noqa: E402

TRUTH_GAP_FREE = f"{demo_data.CELL_ID}_truth.csv"
TRUTH_EPISODIC = f"{demo_data.EPISODIC_CELL_ID}_truth.csv"
#: The (invented) day of the recordings: a fixed date keeps the NWB file's bytes fixed.
SESSION_START = _dt.datetime(2024, 4, 17, 10, 30, tzinfo=_dt.timezone.utc)
#: Libraries whose versions decide the NWB file's bytes.
NWB_LIBRARIES = ("pynwb", "hdmf", "h5py", "hdf5")
_ID_NAMESPACE = uuid.UUID("6c1f3c52-0417-4a5e-9d1b-113000000417")
_ABF_DATA_OFFSET = 4 * 512  # write_abf's header: four 512-byte blocks, then the int16 samples


def library_versions() -> dict[str, str]:
    """The versions of the libraries that write the files."""
    import h5py
    import hdmf
    import pyabf
    import pynwb

    return {
        "numpy": np.__version__, "pyabf": pyabf.__version__, "pynwb": pynwb.__version__,
        "hdmf": hdmf.__version__, "h5py": h5py.__version__, "hdf5": h5py.version.hdf5_version,
    }


# -- NWB ----------------------------------------------------------------------------------------------
def abf_counts(path: Path) -> tuple[np.ndarray, float]:
    """The int16 samples of a one-channel, one-sweep ABF written by ``write_abf``, and the mV per
    count (checked: counts x that equals what Upstroke's ABF reader returns, bit for bit)."""
    rec = open_recording(path)
    mv = rec.sweep(0)
    counts = np.fromfile(path, dtype="<i2", count=mv.size, offset=_ABF_DATA_OFFSET)
    j = int(np.argmax(np.abs(counts)))
    mv_per_count = float(mv[j] / counts[j])
    if not np.array_equal(counts * mv_per_count, mv):
        raise RuntimeError(f"{path}: the int16 block does not scale to the samples the reader returns")
    return counts, mv_per_count


def write_nwb_copy(abf_path: Path, nwb_path: Path) -> None:
    """Write the gap-free ABF's samples as NWB, with fixed identifiers, dates and object IDs."""
    from hdmf.backends.hdf5.h5_utils import H5DataIO
    from pynwb import NWBHDF5IO, NWBFile
    from pynwb.icephys import CurrentClampSeries

    counts, mv_per_count = abf_counts(abf_path)
    nwb = NWBFile(
        session_description=(
            f"Invented demo recording for Upstroke: {demo_data.CELL_ID}, a fictional nodal-like stem-cell-derived "
            f"cardiomyocyte, gap-free in current clamp through baseline, the fictional compound {demo_data.COMPOUND} "
            "and washout. Synthesised by analysis.synthetic; no cell was recorded."
        ),
        identifier=f"upstroke-demo-{demo_data.CELL_ID}",
        session_start_time=SESSION_START, file_create_date=[SESSION_START],
        session_id=demo_data.CELL_ID,
        notes="Invented data (sample_data/make_samples.py). Conditions: " + "; ".join(demo_data.CONDITION_TEXTS),
    )
    device = nwb.create_device(name="amplifier", description="invented current-clamp amplifier")
    electrode = nwb.create_icephys_electrode(
        name="Vm", description=f"whole-cell patch electrode on cell {demo_data.CELL_ID} (invented)", device=device,
    )
    volts_per_count = mv_per_count * 1e-3
    nwb.add_acquisition(CurrentClampSeries(
        name="Vm_000", electrode=electrode, gain=1.0, sweep_number=np.uint32(0),
        data=H5DataIO(counts, compression="gzip", compression_opts=6, shuffle=True, chunks=(1 << 16,)),
        conversion=volts_per_count, resolution=volts_per_count, rate=float(demo_data.FS_HZ), starting_time=0.0,
        description="membrane potential (invented); data are int16 counts, times conversion gives volts",
    ))
    for obj in nwb.all_children():
        # Object IDs are random UUIDs unless set; derive them from each object's type and name.
        obj._AbstractContainer__object_id = str(uuid.uuid5(_ID_NAMESPACE, f"{type(obj).__name__}/{obj.name}"))
    tmp = nwb_path.with_name(f".{nwb_path.stem}.tmp{nwb_path.suffix}")
    try:
        with NWBHDF5IO(str(tmp), "w") as io:
            io.write(nwb)
        os.replace(tmp, nwb_path)
    finally:
        if tmp.exists():
            tmp.unlink()


# -- truth tables and README --------------------------------------------------------------------------
def truth_table(syn, file_name: str, conditions=()) -> BeatTable:
    """The truth of a synthetic recording in the beats CSV's columns (every beat accepted)."""
    beats = syn.truth.beats
    n = len(beats)
    sweep = np.asarray(beats["sweep"])
    t_rec = np.asarray(beats["t_upstroke_s"]) + np.asarray(syn.recording.sweep_starts_s)[sweep]
    names = assign_conditions(sweep, t_rec, conditions) if conditions else np.full(n, "", dtype=object)
    cols = {name: beats[name] for name in beats.names}
    cols.update(file=np.full(n, file_name, dtype=object), accepted=np.ones(n, dtype=np.int64), condition=names)
    return BeatTable(cols)


def _fmt(x: float, decimals: int = 1) -> str:
    return f"{x:.{decimals}f}"


def _steady_rows(syn) -> list[str]:
    """True means over each condition's steady state (its last 30 s), beats with a diastole."""
    b = syn.truth.beats
    t = np.asarray(b["t_upstroke_s"])
    clean = np.asarray([f == "" for f in b["flags"]])
    rows = []
    for cond in demo_data.demo_conditions(None):
        end = min(cond.end, demo_data.DURATION_S)
        sel = clean & (t >= end - cond.steady.value) & (t < end)
        m = {k: float(np.mean(np.asarray(b[k])[sel])) for k in
             ("cl_ms", "rate_bpm", "mdp_mV", "top_mV", "ddr_mV_per_s", "dvdt_max_V_per_s", "peak_mV", "apd50_ms", "apd90_ms")}
        rows.append(
            f"| {cond.name} | {_fmt(end - cond.steady.value, 0)}-{_fmt(end, 0)} | {int(sel.sum())} | {_fmt(m['cl_ms'])} | "
            f"{_fmt(m['rate_bpm'])} | {_fmt(m['mdp_mV'])} | {_fmt(m['top_mV'])} | {_fmt(m['ddr_mV_per_s'])} | "
            f"{_fmt(m['dvdt_max_V_per_s'], 2)} | {_fmt(m['peak_mV'])} | {_fmt(m['apd50_ms'])} | {_fmt(m['apd90_ms'])} |"
        )
    return rows


def _event_rows(syn) -> list[str]:
    """One row per planted event: time, what, and what the review should see."""
    ev, beats = syn.truth.events, syn.truth.beats
    t_up = np.asarray(beats["t_upstroke_s"])
    rows = []
    for e in ev.rows():
        t = float(e["t_s"])
        if e["kind"] == "artefact":
            nxt = t_up[t_up > t].min()
            what = f"electrical artefact: a spike of {e['amplitude_mV']:+.0f} mV for 0.5 ms in diastole"
            see = f"not a beat; the next beat (upstroke at {nxt:.3f} s) is flagged `noisy` and waits for review"
        elif e["kind"] == "dad":
            before = t_up[t_up < t].max()
            what = f"delayed afterdepolarisation of {e['amplitude_mV']:.0f} mV (time of its top)"
            see = f"`dad` on the beat it follows (upstroke at {before:.3f} s)"
        elif e["kind"] == "pause":
            what = "pause: one cycle 2.5 times as long (time of the upstroke that ends it)"
            see = "`pause` on that beat"
        elif e["kind"] == "seal":
            what = (f"seal trouble until {float(e['stop_s']):.1f} s: a leak depolarises the cell by "
                    f"{e['amplitude_mV']:.0f} mV, noise rises to 1.5 mV rms")
            see = ("`noisy` and `mdp_drift` on the beats inside, which wait for review: the washout summary leaves "
                   "them out until they are accepted or rejected; the seal's recovery also looks like a small DAD "
                   "to the detector")
        else:
            what, see = str(e["kind"]), ""
        rows.append(f"| {t:.3f} | {what} | {see} |")
    return rows


def readme_text(gap_free, episodic) -> str:
    """The README of the sample folder, with the planted events' times from the truth."""
    d = demo_data
    ep_ead = episodic.truth.events
    ead = next(ep_ead.rows())
    ep_beats = episodic.truth.beats
    ead_row = next(r for r in ep_beats.rows() if r["sweep"] == ead["sweep"] and r["t_upstroke_s"] < ead["t_s"]
                   and r["t_upstroke_s"] > ead["t_s"] - 0.5)
    conditions = "\n".join(f"  --condition \"{t}\" \\" for t in d.CONDITION_TEXTS)
    lines = [
        "# Sample recordings (invented)",
        "",
        "**These recordings are invented.** No cell was recorded: `make_samples.py` synthesises them from",
        "`analysis.synthetic` (a parametric action-potential waveform with exactly known parameters) with",
        f"fixed seeds. The cells {d.CELL_ID} and {d.EPISODIC_CELL_ID} and the compound {d.COMPOUND} are fictional.",
        "The values are chosen to be plausible against the reference table of MEASUREMENTS.md (human",
        "sinoatrial myocytes for the nodal-like cell, adult ventricle for the ventricular-like one). Use",
        "the files to learn Upstroke and to check it, never as data about real cells.",
        "",
        "| file | what |",
        "|---|---|",
        f"| `{d.GAP_FREE_ABF}` | {d.CELL_ID}, nodal-like stem-cell-derived cardiomyocyte, current clamp, gap-free, "
        f"{d.DURATION_S:.0f} s at {d.FS_HZ / 1000:.0f} kHz, ABF 1 (int16) |",
        f"| `{d.GAP_FREE_NWB}` | the same samples as NWB (int16 with a conversion to volts, gzip) |",
        f"| `{d.EPISODIC_ABF}` | {d.EPISODIC_CELL_ID}, ventricular-like stem-cell-derived cardiomyocyte, "
        f"{d.EPISODIC_SWEEPS} consecutive sweeps of {d.EPISODIC_SWEEP_S:.0f} s at {d.EPISODIC_FS_HZ / 1000:.0f} kHz, ABF 1 (int16) |",
        f"| `{TRUTH_GAP_FREE}`, `{TRUTH_EPISODIC}` | the true value of every beat's parameters (beats CSV columns), "
        "from the exact waveform |",
        "| `MANIFEST.json` | sizes, SHA-256 and the library versions that wrote the files |",
        "",
        f"## {d.CELL_ID}: baseline, {d.COMPOUND}, washout",
        "",
        f"After a {d.WASH_IN_S:.0f} s baseline, {d.COMPOUND} (1 uM) is washed in. It flattens phase 4 (the diastolic",
        "depolarisation) to 55 % of its slope, ramping in over about 15 s, so the cell slows; from",
        f"{d.WASH_OUT_S:.0f} s it is washed out and the rate recovers. The upstroke, the peak and the repolarisation",
        "do not change. The recording adds 0.3 mV rms of noise, 0.4 mV of 50 Hz hum and a drift of",
        "0.8 mV/min.",
        "",
        "Conditions (what `upstroke demo` marks; the steady state is the last 30 s of each):",
        "",
        *[f"- `{t}`" for t in d.CONDITION_TEXTS],
        "",
        "True steady-state means (beats with a diastole; from the truth table, not from an analysis; the",
        "washout window holds the seal trouble, which depolarises its MDP and TOP: every beat of the window",
        "is counted here, while Upstroke's summary holds the seal-trouble beats for review and leaves them",
        "out until they are judged):",
        "",
        "| condition | window (s) | beats | CL (ms) | rate (bpm) | MDP (mV) | TOP (mV) | DDR (mV/s) "
        "| dV/dt max (V/s) | peak (mV) | APD50 (ms) | APD90 (ms) |",
        "|---|---|---|---|---|---|---|---|---|---|---|---|",
        *_steady_rows(gap_free),
        "",
        "Planted for the review to catch (times in seconds from the start of the recording):",
        "",
        "| time (s) | what | what the review should see |",
        "|---|---|---|",
        *_event_rows(gap_free),
        "",
        f"## {d.EPISODIC_CELL_ID}: episodic",
        "",
        f"A ventricular-like cell (MDP about -85 mV, dV/dt max about 260 V/s, APD90 about 245 ms, CL about",
        f"1.2 s) in {d.EPISODIC_SWEEPS} sweeps, with 0.25 mV rms of noise and 0.3 mV of 50 Hz hum. The first beat of",
        "every sweep has no diastole before it (`no_diastole`). One early afterdepolarisation of",
        f"{ead['amplitude_mV']:.0f} mV takes off at {float(ead['t_s']):.3f} s in sweep {int(ead['sweep'])}, in the "
        f"repolarisation of the beat at {float(ead_row['t_upstroke_s']):.3f} s (`ead`).",
        "",
        "## Try it",
        "",
        "```",
        "upstroke demo",
        f"upstroke info sample_data/{d.GAP_FREE_ABF}",
        f"upstroke analyze sample_data/{d.GAP_FREE_ABF} \\",
        conditions,
        "  --csv beats.csv --summary-csv summary.csv",
        "```",
        "",
        f"`beats.csv` has the rows and columns of `{TRUTH_GAP_FREE}` (then the review's own columns), so the two",
        "compare line by line: what Upstroke measured against the true values of the waveform it was given.",
        "The command prints how many beats wait for review; `summary.csv` counts them (`n_to_review`).",
        "",
        "## Making them again",
        "",
        "`python sample_data/make_samples.py` rewrites every file here, bit for bit (the NWB file for the",
        "same versions of pynwb, hdmf, h5py and HDF5; see the script). `tests/test_sample_data.py` checks",
        "that, and that Upstroke's analysis finds what is planted.",
        "",
    ]
    return "\n".join(lines)


# -- all of it ----------------------------------------------------------------------------------------
def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def make_samples(out_dir: str | os.PathLike = HERE) -> list[Path]:
    """Write every sample file into ``out_dir``; returns their paths.

    Returns
    -------
    list of Path
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    gap_free, episodic = demo_data.gap_free_scenario(), demo_data.episodic_scenario()
    paths = {name: out / name for name in (
        demo_data.GAP_FREE_ABF, demo_data.GAP_FREE_NWB, demo_data.EPISODIC_ABF, TRUTH_GAP_FREE, TRUTH_EPISODIC,
        "README.md",
    )}
    write_abf(gap_free.recording, paths[demo_data.GAP_FREE_ABF])
    write_abf(episodic.recording, paths[demo_data.EPISODIC_ABF])
    write_nwb_copy(paths[demo_data.GAP_FREE_ABF], paths[demo_data.GAP_FREE_NWB])
    conditions = demo_data.demo_conditions(None)
    for name, syn, file_name, conds in (
        (TRUTH_GAP_FREE, gap_free, demo_data.GAP_FREE_ABF, conditions),
        (TRUTH_EPISODIC, episodic, demo_data.EPISODIC_ABF, ()),
    ):
        with open(paths[name], "w", encoding="utf-8", newline="") as fh:
            truth_table(syn, file_name, conds).to_csv(fh, columns=CSV_COLUMNS)  # the truth: no review
    paths["README.md"].write_text(readme_text(gap_free, episodic), encoding="utf-8", newline="\n")
    manifest = {
        "note": "invented demo data; see README.md",
        "made_with": library_versions(),
        "files": {name: {"bytes": p.stat().st_size, "sha256": _sha256(p)} for name, p in sorted(paths.items())},
    }
    paths["MANIFEST.json"] = out / "MANIFEST.json"
    paths["MANIFEST.json"].write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n", encoding="utf-8", newline="\n")
    return list(paths.values())


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) > 1 or (args and args[0].startswith("-")):
        print("usage: python sample_data/make_samples.py [OUT_DIR]", file=sys.stderr)
        return 2
    for path in make_samples(args[0] if args else HERE):
        print(f"{path}  {path.stat().st_size / 1e6:.2f} MB")
    return 0


if __name__ == "__main__":
    sys.exit(main())
