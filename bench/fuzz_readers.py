"""Coverage-guided fuzzing of the ABF and NWB readers with atheris (libFuzzer for Python).

Every input is a seed recording (a real ABF 1 and ABF 2 file from myokit's wheel, a synthetic
cell in ABF 1 and in NWB) with a few edits the fuzzer chooses: bytes set, bits flipped, 32-bit
fields overwritten (in the header more often than in the data), or the file cut short. The
harness opens it with :func:`analysis.open_recording` and reads every sweep. The only answers
allowed are a recording of finite samples of the declared lengths, or a ``RecordingError``
whose message is one line naming the file. Anything else (another exception, a header-sized
allocation, which fails under the address-space cap set here) is a crash: libFuzzer saves the
input that caused it (``crash-*``) for replay and for the bad-input corpus (``tests/corpus``).

Long runs (all libFuzzer options work)::

    python bench/fuzz_readers.py -max_total_time=3600 -artifact_prefix=bench/out/fuzz/
    python bench/fuzz_readers.py bench/out/fuzz/crash-1234abcd     # replay one input

Without atheris (no wheel for the platform) the same harness runs on seeded random inputs::

    python bench/fuzz_readers.py --random 5000 --seed 1

It prints the number of inputs tried, how many opened and how many were refused, the time and
the peak memory.
"""

from __future__ import annotations

import argparse
import random
import resource
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

#: Address space the fuzzed process may use: an allocation sized by a damaged header fails at
#: once (MemoryError, reported as a crash) instead of exhausting the machine. libhdf5 itself
#: allocates a variable-length string by its stored length before it compares that length with
#: the heap object's (an NWB file with one damaged byte asked for 4 GB): under this cap that
#: allocation fails inside HDF5 and the file is refused as corrupt.
ADDRESS_SPACE_BYTES = 3 * 2**30
#: Sweeps longer than this are read in part (the first and last samples), to keep each input fast.
READ_WHOLE_SAMPLES = 2_000_000
#: Bytes of each seed where edits go more often: the headers that size everything.
HEADER_BYTES = 8192


class Provider:
    """The edits' choices drawn from the fuzzer's bytes (the same for atheris and the random loop)."""

    def __init__(self, data: bytes) -> None:
        self._data = data
        self._at = 0

    def int_in_range(self, low: int, high: int) -> int:
        span = high - low + 1
        n_bytes = max(1, (span.bit_length() + 7) // 8)
        chunk = self._data[self._at:self._at + n_bytes]
        self._at += n_bytes
        return low + int.from_bytes(chunk.ljust(n_bytes, b"\0"), "little") % span

    @property
    def exhausted(self) -> bool:
        """True once every byte is used: the edits stop there (a short input is a light edit)."""
        return self._at >= len(self._data)

    def raw(self, n: int) -> bytes:
        chunk = self._data[self._at:self._at + n]
        self._at += n
        return chunk.ljust(n, b"\0")


def make_seeds(folder: Path, formats: tuple[str, ...] = ("abf", "nwb")) -> list[Path]:
    """The seed recordings of the given formats, written into ``folder``."""
    from analysis.synthetic import preset, synthesize
    from analysis.synthetic import write_abf, write_nwb

    syn = synthesize(preset("nodal-like"), duration_s=1.0, fs_hz=10_000.0, seed=7)
    seeds = [folder / "synthetic.abf", folder / "synthetic.nwb"]
    write_abf(syn.recording, seeds[0])
    write_nwb(syn.recording, seeds[1])
    try:
        import myokit

        shipped = Path(myokit.__file__).parent / "tests" / "data" / "formats"
        for name in ("abf-v1.abf", "abf-v2.abf"):
            if (shipped / name).is_file():
                seeds.append(folder / name)
                seeds[-1].write_bytes((shipped / name).read_bytes())
    except ImportError:
        pass
    return [s for s in seeds if s.suffix.lstrip(".") in formats]


def mutate(seed: bytes, p: Provider) -> bytes:
    """The seed with the edits the provider chooses."""
    buf = bytearray(seed)
    for _ in range(p.int_in_range(1, 8)):
        if p.exhausted:
            break
        kind = p.int_in_range(0, 5)
        limit = len(buf) if p.int_in_range(0, 3) == 0 else min(len(buf), HEADER_BYTES)
        if limit == 0:
            break
        at = p.int_in_range(0, limit - 1)
        if kind == 0:
            buf[at] = p.int_in_range(0, 255)
        elif kind == 1:
            buf[at] ^= 1 << p.int_in_range(0, 7)
        elif kind in (2, 3):  # a whole little-endian field: counts, sizes and offsets are 32-bit
            value = p.raw(4) if kind == 2 else (0xFFFFFFFF, 0x7FFFFFFF, 0x80000000, 0, 1)[p.int_in_range(0, 4)].to_bytes(4, "little")
            buf[at:at + 4] = value
        elif kind == 4:
            del buf[at:]
        else:
            buf[at:at + 1] = bytes(p.int_in_range(0, 64))  # a run of zero bytes inserted
    return bytes(buf)


class Harness:
    """Opens each fuzzed file and checks the answer; counts what happened."""

    def __init__(self, seeds: list[Path], scratch: Path) -> None:
        self.seeds = [(s.suffix, s.read_bytes()) for s in seeds]
        self.scratch = scratch
        self.opened = 0
        self.refused = 0
        self.crashed = 0

    def __call__(self, data: bytes) -> None:
        from analysis import open_recording
        from analysis.errors import RecordingError

        p = Provider(data)
        suffix, seed = self.seeds[p.int_in_range(0, len(self.seeds) - 1)]
        path = self.scratch / f"fuzzed{suffix}"
        path.write_bytes(mutate(seed, p))
        try:
            rec = open_recording(path)
            for sweep in range(rec.n_sweeps):
                for channel in range(len(rec.channels)):
                    _read(rec, sweep, channel)
        except RecordingError as exc:
            line = exc.one_line()
            if "\n" in line or str(path) not in line:
                raise AssertionError(f"not one line naming the file: {line!r}") from None
            self.refused += 1
            return
        self.opened += 1


def _read(rec, sweep: int, channel: int) -> None:
    import numpy as np

    n = rec.sweep_lengths[sweep]
    if n < 0:
        raise AssertionError(f"sweep {sweep} declares {n} samples")
    parts = [(0, n)] if n <= READ_WHOLE_SAMPLES else [(0, 1000), (n - 1000, n)]
    for start, stop in parts:
        v = rec.sweep(sweep, channel, start, stop)
        if v.shape != (stop - start,) or v.dtype != np.float64:
            raise AssertionError(f"sweep {sweep} gave {v.shape} {v.dtype} for samples {start}:{stop}")
        if not np.all(np.isfinite(v)):
            raise AssertionError(f"sweep {sweep} gave non-finite samples without an error")


def _cap_memory() -> None:
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    cap = ADDRESS_SPACE_BYTES if hard == resource.RLIM_INFINITY else min(ADDRESS_SPACE_BYTES, hard)
    resource.setrlimit(resource.RLIMIT_AS, (cap, hard))


def _report(harness: Harness, started: float) -> None:
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    total = harness.opened + harness.refused
    print(
        f"fuzz_readers: {total + harness.crashed} inputs ({harness.opened} opened, {harness.refused} refused, "
        f"{harness.crashed} crashed) "
        f"in {time.perf_counter() - started:.1f} s, peak memory {peak_mb:.0f} MB",
        file=sys.stderr,
    )


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0], add_help=True)
    parser.add_argument("--random", type=int, metavar="N", help="no atheris: N seeded random inputs")
    parser.add_argument("--seed", type=int, default=1, help="the random loop's seed")
    parser.add_argument("--crashes", default=str(REPO / "bench" / "out" / "fuzz"),
                        help="where the random loop saves an input that crashes (libFuzzer: -artifact_prefix=)")
    parser.add_argument("--formats", default="abf,nwb",
                        help="the seed formats to fuzz, comma-separated (default: abf,nwb)")
    parser.add_argument("--keep-going", action="store_true",
                        help="random loop: save every crashing input and go on, then count them (exit 1 if any)")
    own, rest = parser.parse_known_args(argv[1:])
    import warnings

    warnings.simplefilter("ignore")  # the readers' libraries warn about what they repair
    scratch = Path(tempfile.mkdtemp(prefix="upstroke-fuzz-"))
    formats = tuple(f.strip().lower() for f in own.formats.split(",") if f.strip())
    harness = Harness(make_seeds(scratch, formats), scratch)
    if not harness.seeds:
        parser.error(f"--formats {own.formats!r} names no seed format (abf, nwb)")
    _cap_memory()
    started = time.perf_counter()
    if own.random is not None:
        rng = random.Random(own.seed)
        for i in range(own.random):
            data = rng.randbytes(rng.randint(4, 96))
            try:
                harness(data)
            except Exception as exc:
                crash = Path(own.crashes) / f"crash-random-{own.seed}-{i}"
                crash.parent.mkdir(parents=True, exist_ok=True)
                crash.write_bytes(data)  # replays as an input: python bench/fuzz_readers.py FILE
                print(f"fuzz_readers: input {i} crashed ({type(exc).__name__}: {str(exc)[:120]}); "
                      f"saved as {crash}", file=sys.stderr)
                harness.crashed += 1
                if not own.keep_going:
                    _report(harness, started)
                    raise
        _report(harness, started)
        return 1 if harness.crashed else 0
    import atexit

    import atheris

    atexit.register(_report, harness, started)  # libFuzzer exits the process when it is done
    if not any(arg.startswith("-max_len=") for arg in rest):
        rest.append("-max_len=256")  # room for a few dozen edits from the first runs on
    if not any(arg.startswith("-rss_limit_mb=") for arg in rest):
        rest.append(f"-rss_limit_mb={ADDRESS_SPACE_BYTES // 2**20}")  # the cap above bounds memory
    atheris.Setup([argv[0], *rest], harness)
    atheris.Fuzz()
    return 0


if __name__ == "__main__":
    if "--random" not in sys.argv:
        import atheris

        with atheris.instrument_imports(include=["analysis", "pyabf"]):
            import analysis.readers  # noqa: F401  (coverage of the readers and pyabf's parser)
            import pyabf  # noqa: F401
    sys.exit(main(sys.argv))
