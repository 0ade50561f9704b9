"""Damaged delimited-text recordings: junk, NaN, Inf, one sample, irregular or absurd time.

A good file here is a header naming each column with its units (``time_s,Vm_mV``) and one line
per sample, as numpy's ``savetxt`` writes it; each case spoils one thing.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .make_corpus import Case

N = 2000
RATE_HZ = 10_000.0


def _rows(t_s: np.ndarray, v_mV: np.ndarray, fmt: str = "{:.6f},{:.4f}") -> list[str]:
    return [fmt.format(t, v) for t, v in zip(t_s, v_mV)]


def _good() -> tuple[np.ndarray, np.ndarray]:
    t = np.arange(N) / RATE_HZ
    v = -60.0 + 10.0 * np.sin(2 * np.pi * 3.0 * t)
    return t, v


def _with_line(k: int, text: str) -> str:
    t, v = _good()
    lines = ["time_s,Vm_mV", *_rows(t, v)]
    lines[k] = text
    return "\n".join(lines) + "\n"


def build(folder: Path) -> list[Case]:
    """The text cases, written into ``folder``."""
    t, v = _good()
    header = "time_s,Vm_mV"
    body = "\n".join(_rows(t, v))
    v_nan = v.copy()
    v_nan[[700, 701, 1500]] = np.nan
    v_inf = v.copy()
    v_inf[900] = np.inf
    t_gap = t.copy()
    t_gap[1000:] += 0.0005  # five samples missing at line 1002
    t_jitter = t + np.random.default_rng(11).uniform(-0.3, 0.3, N) / RATE_HZ
    t_back = t.copy()
    t_back[[800, 801]] = t_back[[801, 800]]
    specs: list[tuple[str, bytes | str, str, str]] = [
        ("text-binary-junk", b"time_s,Vm_mV\n" + bytes(range(256)) * 40, r"binary|not a text",
         "a header followed by binary bytes"),
        ("text-random-junk", "".join(chr(33 + (i * 7919) % 90) for i in range(5000)) + "\n",
         r"units|header|column", "printable junk without a header or delimiters"),
        ("text-word-in-cell", _with_line(500, "0.049900,abc"), r"line 501.*'abc'", "a word where a number should be"),
        ("text-decimal-comma", "time_s;Vm_mV\n" + "\n".join(f"{a:.4f};{b:.3f}".replace(".", ",") for a, b in zip(t, v)) + "\n",
         r"decimal comma", "numbers written with decimal commas"),
        ("text-short-line", _with_line(300, "0.029900"), r"line 301", "a line with one cell of two"),
        ("text-nan", f"{header}\n" + "\n".join(_rows(t, v_nan)) + "\n", r"3 NaN or Inf.*line 702",
         "three NaN samples, the first on line 702"),
        ("text-inf", f"{header}\n" + "\n".join(_rows(t, v_inf)) + "\n", r"1 NaN or Inf.*line 902",
         "one Inf sample on line 902"),
        ("text-nan-time", _with_line(20, "nan,-60.0"), r"NaN or Inf", "a NaN time"),
        ("text-single-sample", f"{header}\n0.0,-60.0\n", r"only 1 sample|fewer than two|one sample",
         "one sample only"),
        ("text-header-only", f"{header}\n", r"no samples", "a header without samples"),
        ("text-no-header", body + "\n", r"no header", "numbers without a header line"),
        ("text-no-units", "time,Vm\n" + body + "\n", r"no units", "column names without units"),
        ("text-time-only", "time_s\n" + "\n".join(f"{x:.6f}" for x in t) + "\n", r"only a time column",
         "a time column and nothing else"),
        ("text-no-time-column", "Vm_mV,Im_pA\n" + body + "\n", r"no time column", "no column in s or ms"),
        ("text-gap", f"{header}\n" + "\n".join(_rows(t_gap, v)) + "\n", r"irregular.*line 1002",
         "five samples missing after line 1001"),
        ("text-jitter", f"{header}\n" + "\n".join(_rows(t_jitter, v, "{:.9f},{:.4f}")) + "\n", r"irregular",
         "sample times jittered by up to 30 % of the interval"),
        ("text-time-backwards", f"{header}\n" + "\n".join(_rows(t_back, v)) + "\n", r"do not increase",
         "two samples swapped in time"),
        ("text-time-constant", f"{header}\n" + "\n".join(_rows(np.zeros(N), v)) + "\n", r"do not increase",
         "every sample at time 0"),
        ("text-rate-absurd", f"{header}\n" + "\n".join(_rows(t * 1e-9, v, "{:.6e},{:.4f}")) + "\n",
         r"sampling rate", "times 10^-13 s apart: a 10 THz rate"),
        ("text-beyond-float64", _with_line(1200, "0.119900,1e400"), r"NaN or Inf.*line 1201",
         "a sample written as 1e400, beyond float64 (read as Inf)"),
    ]
    cases = []
    for name, content, expect, why in specs:
        path = folder / f"{name}.csv"
        if isinstance(content, str):
            path.write_text(content, encoding="utf-8")
        else:
            path.write_bytes(content)
        cases.append(Case(name, (path,), ("info", str(path)), path, expect, why))
    return cases
