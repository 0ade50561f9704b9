"""Damaged ABF files: cut at every header boundary, fields set to impossible values, bits flipped.

Seeds: the real ABF 1 and ABF 2 recordings that myokit's wheel ships
(``myokit/tests/data/formats/abf-v1.abf``, ``abf-v2.abf``, written by the acquisition software
itself), and a synthetic current-clamp cell written in pyabf's own ABF 1 writer's layout
(:func:`analysis.synthetic.write_abf`). Field offsets are those of the format as pyabf reads
it: ``pyabf/abf1/headerV1.py`` (ABF 1 header), ``pyabf/abf2/headerV2.py`` and
``pyabf/abf2/section.py`` (ABF 2 header and section map: block, bytes per entry, entry count).
"""

from __future__ import annotations

import shutil
import struct
from pathlib import Path

from .make_corpus import Case

# ABF 1 header fields (pyabf/abf1/headerV1.py).
V1_ACQ_LENGTH = 10  # lActualAcqLength, int32: samples in the data block (all channels)
V1_POINTS_IGNORED = 14  # nNumPointsIgnored, int16: samples skipped before the data
V1_EPISODES = 16  # lActualEpisodes, int32
V1_DATA_BLOCK = 40  # lDataSectionPtr, int32, in 512-byte blocks
V1_TAG_COUNT = 48  # lNumTagEntries, int32
V1_DATA_FORMAT = 100  # nDataFormat, int16: 0 int16, 1 float32
V1_N_CHANNELS = 120  # nADCNumChannels, int16
V1_INTERVAL = 122  # fADCSampleInterval, float32, us per sample (all channels)
V1_ADC_RANGE = 244  # fADCRange, float32, volts
V1_ADC_RESOLUTION = 252  # lADCResolution, int32, counts
V1_INSTRUMENT_SCALE = 922  # fInstrumentScaleFactor, 16 x float32
V1_UNITS = 602  # sADCUnits, 16 x 8 bytes
V1_HEADER_END = 5806  # the last field pyabf reads ends here
# ABF 2 header (pyabf/abf2/headerV2.py) and section map entries (pyabf/abf2/section.py).
V2_EPISODES = 12  # lActualEpisodes, uint32
V2_DATA_FORMAT = 30  # nDataFormat, uint16
V2_SECTIONS = {
    "protocol": 76, "ADC": 92, "DAC": 108, "epoch": 124, "epoch-per-DAC": 156,
    "strings": 220, "data": 236, "tag": 252, "synch-array": 316,
}
V2_PROTOCOL_INTERVAL = 2  # fADCSequenceInterval, float32, from the protocol section's start
BLOCK = 512

_CUT = r"cut short|ends inside|holds only|past the end|not an ABF file|truncated|could not be parsed"
_CORRUPT = r"corrupt|damaged|could not be parsed|unknown|not an ABF"


def _myokit_formats() -> Path | None:
    try:
        import myokit
    except ImportError:
        return None
    folder = Path(myokit.__file__).parent / "tests" / "data" / "formats"
    return folder if (folder / "abf-v2.abf").is_file() else None


def _synthetic_abf1(path: Path) -> Path:
    from analysis.synthetic import preset, synthesize
    from analysis.synthetic import write_abf

    syn = synthesize(preset("nodal-like"), duration_s=2.0, fs_hz=10_000.0, seed=3)
    write_abf(syn.recording, path)
    return path


def _patched(seed: Path, dest: Path, *edits: tuple[int, str, object]) -> Path:
    data = bytearray(seed.read_bytes())
    for offset, fmt, value in edits:
        struct.pack_into("<" + fmt, data, offset, value)
    dest.write_bytes(bytes(data))
    return dest


def _cut(seed: Path, dest: Path, keep: int) -> Path:
    dest.write_bytes(seed.read_bytes()[:keep])
    return dest


def _sections(seed: Path) -> dict[str, tuple[int, int, int]]:
    head = seed.read_bytes()[:BLOCK]
    return {name: struct.unpack_from("<IIi", head, off) for name, off in V2_SECTIONS.items()}


def _info(name: str, path: Path, expect: str, why: str, *, huge: bool = False) -> Case:
    return Case(name, (path,), ("info", str(path)), path, expect, why, huge=huge)


def build(folder: Path) -> list[Case]:
    """The ABF cases, written into ``folder``."""
    cases = _synthetic_cases(folder)
    formats = _myokit_formats()
    if formats is not None:
        v1 = shutil.copyfile(formats / "abf-v1.abf", folder / "seed-v1.abf")
        v2 = shutil.copyfile(formats / "abf-v2.abf", folder / "seed-v2.abf")
        cases += _abf1_cuts(Path(v1), folder) + _abf2_cuts(Path(v2), folder)
        cases += _abf2_fields(Path(v2), folder)
    return cases


def _synthetic_cases(folder: Path) -> list[Case]:
    seed = _synthetic_abf1(folder / "seed-synthetic.abf")
    p = lambda name: folder / f"{name}.abf"  # noqa: E731 - a file per case
    out = []
    for name, edit, expect, why in [
        ("abf1-no-channels", (V1_N_CHANNELS, "h", 0), r"no channels", "nADCNumChannels = 0"),
        ("abf1-99-channels", (V1_N_CHANNELS, "h", 99), r"99 channels", "nADCNumChannels above ABF 1's 16"),
        ("abf1-interval-zero", (V1_INTERVAL, "f", 0.0), r"sample interval", "a zero sample interval: an infinite rate"),
        ("abf1-interval-nan", (V1_INTERVAL, "f", float("nan")), r"sample interval", "a NaN sample interval"),
        ("abf1-interval-negative", (V1_INTERVAL, "f", -100.0), r"sample interval", "a negative sample interval"),
        ("abf1-rate-absurdly-high", (V1_INTERVAL, "f", 1e-9), r"sampling rate|sample interval",
         "1e-9 us per sample: 1e15 Hz, beyond any digitiser"),
        ("abf1-rate-absurdly-low", (V1_INTERVAL, "f", 1e9), r"sampling rate|sample interval",
         "1e9 us per sample: one sample in 17 minutes"),
        ("abf1-float-samples", (V1_DATA_FORMAT, "h", 1), r"floating-point", "ABF 1 float32 data, which pyabf cannot scale"),
        ("abf1-unknown-sample-format", (V1_DATA_FORMAT, "h", 7), r"unknown sample format", "nDataFormat = 7"),
        ("abf1-negative-length", (V1_ACQ_LENGTH, "i", -5), _CORRUPT, "lActualAcqLength < 0"),
        # Found by bench/fuzz_readers.py: the data started before the file (a memory-map fault).
        ("abf1-negative-points-ignored", (V1_POINTS_IGNORED, "h", -32768), _CORRUPT, "nNumPointsIgnored = -32768"),
        # Found by bench/fuzz_readers.py: four 0xFF bytes over fADCRange opened as all-NaN samples.
        ("abf1-nan-adc-range", (V1_ADC_RANGE, "I", 0xFFFFFFFF), r"scaling", "fADCRange is a NaN"),
        ("abf1-zero-adc-range", (V1_ADC_RANGE, "f", 0.0), r"scaling", "fADCRange = 0: every sample 0 mV"),
        ("abf1-zero-resolution", (V1_ADC_RESOLUTION, "i", 0), r"scaling|could not be parsed",
         "lADCResolution = 0: a division by zero in the scaling"),
        ("abf1-zero-instrument-scale", (V1_INSTRUMENT_SCALE, "f", 0.0), r"scaling|could not be parsed",
         "fInstrumentScaleFactor = 0 for channel 0"),
    ]:
        out.append(_info(name, _patched(seed, p(name), edit), expect, why))
    for name, edit, expect, why in [
        ("abf1-huge-sample-count", (V1_ACQ_LENGTH, "i", 2**31 - 1), r"declares \d+ samples",
         "lActualAcqLength = 2^31 - 1: 4 GiB of samples in a 40 kB file"),
        ("abf1-huge-sweep-count", (V1_EPISODES, "i", 2**31 - 1), r"sweeps?|episodes?",
         "lActualEpisodes = 2^31 - 1: pyabf would build a list of that many sweeps"),
        ("abf1-huge-tag-count", (V1_TAG_COUNT, "i", 2**31 - 1), r"tags? past the end",
         "lNumTagEntries = 2^31 - 1"),
        ("abf1-data-past-the-end", (V1_DATA_BLOCK, "i", 10**6), r"declares \d+ samples",
         "the data block moved 512 MB past the end of the file"),
    ]:
        out.append(_info(name, _patched(seed, p(name), edit), expect, why, huge=True))
    # The units as pyabf reads them ("8s" at sADCUnits): a membrane potential labelled pA. The
    # analysis must refuse it (and say how to override the units); `info` only describes it.
    name = "abf1-wrong-units"
    path = _patched(seed, p(name), (V1_UNITS, "8s", b"pA      "))
    outputs = (folder / f"{name}.h5", folder / f"{name}.csv")
    out.append(Case(name, (path,), ("analyze", str(path), "--out", str(outputs[0]), "--csv", str(outputs[1])),
                    path, r"pA.*--units", "a membrane potential in mV labelled pA", outputs=outputs))
    return out


def _abf1_cuts(seed: Path, folder: Path) -> list[Case]:
    size = seed.stat().st_size
    (data_block,) = struct.unpack_from("<i", seed.read_bytes(), V1_DATA_BLOCK)
    data_start = data_block * BLOCK
    points = {
        "in-signature": 3, "after-signature": 4, "in-file-info": 9, "in-sizes": 100,
        "in-channel-table": 1000, "at-block-4": 2048, "at-block-8": 4096,
        "before-header-end": V1_HEADER_END - 1, "after-header-fields": V1_HEADER_END + 200,
        "at-data-start": data_start, "in-first-sample": data_start + 1,
        "in-data": (data_start + size) // 2, "one-byte-short": size - 200,
    }
    out = []
    for where, keep in points.items():
        name = f"abf1-cut-{where}"
        path = _cut(seed, folder / f"{name}.abf", keep)
        out.append(_info(name, path, _CUT, f"the real ABF 1 file cut after {keep} of {size} bytes"))
    return out


def _abf2_cuts(seed: Path, folder: Path) -> list[Case]:
    size = seed.stat().st_size
    points = {"in-signature": 3, "after-signature": 4, "in-header": 100, "before-section-map-end": 330,
              "at-header-end": BLOCK}
    for section, (block, entry_bytes, count) in _sections(seed).items():
        if count <= 0:
            continue
        start, length = block * BLOCK, entry_bytes * count
        points[f"at-{section}-start"] = start
        points[f"in-{section}"] = start + max(1, length // 2)
        if length > 4:
            points[f"before-{section}-end"] = start + length - 1
    out = []
    for where, keep in sorted(points.items(), key=lambda kv: kv[1]):
        if keep >= size:
            continue
        name = f"abf2-cut-{where}"
        path = _cut(seed, folder / f"{name}.abf", keep)
        out.append(_info(name, path, _CUT, f"the real ABF 2 file cut after {keep} of {size} bytes"))
    return out


def _abf2_fields(seed: Path, folder: Path) -> list[Case]:
    sec = _sections(seed)
    protocol_start = sec["protocol"][0] * BLOCK
    synch_block, synch_bytes, synch_count = sec["synch-array"]
    # A count as pyabf reads it (int32) that is enormous, with the high half of the 64-bit field
    # set so that it is negative as a whole.
    sneaky = (0xFFFFFFFF << 32 | 0x7FFFFFFF) - (1 << 64)
    p = lambda name: folder / f"{name}.abf"  # noqa: E731
    huge = [
        ("abf2-huge-sweep-count", (V2_EPISODES, "I", 2**32 - 1), r"sweeps?|episodes?",
         "lActualEpisodes = 2^32 - 1: pyabf would build lists of that many sweeps"),
        ("abf2-huge-sample-count", (V2_SECTIONS["data"] + 8, "q", 10**12), r"declares \d+ samples|past the end",
         "the data section declares 10^12 samples"),
        ("abf2-huge-adc-count", (V2_SECTIONS["ADC"] + 8, "q", 10**9), r"ADC section|past the end|channels",
         "the ADC section declares 10^9 channels"),
        ("abf2-huge-string-count", (V2_SECTIONS["strings"] + 8, "q", 10**9), r"strings section|past the end",
         "the strings section declares 10^9 entries"),
        ("abf2-huge-synch-count", (V2_SECTIONS["synch-array"] + 8, "q", 10**9), r"synch array|past the end",
         "the synch array declares 10^9 sweeps"),
        ("abf2-huge-synch-count-int32", (V2_SECTIONS["synch-array"] + 8, "q", sneaky), r"synch array|past the end|corrupt",
         "the synch-array count is 2^31 - 1 as pyabf reads it (int32) but negative as an int64"),
        ("abf2-huge-data-count-int32", (V2_SECTIONS["data"] + 8, "q", sneaky), r"declares \d+ samples|past the end|corrupt",
         "the data count is 2^31 - 1 as pyabf reads it (int32) but negative as an int64"),
    ]
    plain = [
        ("abf2-no-channels", (V2_SECTIONS["ADC"] + 8, "q", 0), r"no channels", "the ADC section lists no channels"),
        ("abf2-unknown-sample-format", (V2_DATA_FORMAT, "H", 2), r"unknown sample format", "nDataFormat = 2"),
        ("abf2-odd-sample-size", (V2_SECTIONS["data"] + 4, "I", 3), r"3-byte samples", "3-byte samples"),
        ("abf2-interval-zero", (protocol_start + V2_PROTOCOL_INTERVAL, "f", 0.0), r"sample interval",
         "fADCSequenceInterval = 0"),
        ("abf2-rate-absurdly-high", (protocol_start + V2_PROTOCOL_INTERVAL, "f", 1e-9),
         r"sampling rate|sample interval", "1e-9 us per sample: 1e15 Hz"),
        ("abf2-no-protocol", (V2_SECTIONS["protocol"] + 8, "q", 0), r"no protocol section", "the protocol section is gone"),
        ("abf2-data-past-the-end", (V2_SECTIONS["data"], "I", 10**6), r"declares \d+ samples|past the end",
         "the data section moved 512 MB past the end of the file"),
    ]
    if synch_count > 1 and synch_bytes == 8:
        # One sweep's length (lLength, the second int32 of its synch entry) made negative: a
        # bit flip that once opened as a sweep of -16776700 samples.
        at = synch_block * BLOCK + 8 * (synch_count // 2) + 4
        plain.append(("abf2-negative-sweep-length", (at, "i", -16776700), r"sweep|length|corrupt",
                      "one synch-array sweep length is negative"))
    out = [_info(n, _patched(seed, p(n), e), x, w, huge=True) for n, e, x, w in huge]
    out += [_info(n, _patched(seed, p(n), e), x, w) for n, e, x, w in plain]
    return out
