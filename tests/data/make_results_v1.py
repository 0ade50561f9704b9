"""Writes tests/data/results_v1.h5: a small results file in the first layout (schema 1).

The file was made once with the code of the time (results schema 1) and is kept, unchanged, so
that the tests prove that files written then still open. Running this script again with a newer
Upstroke writes the newer layout: do not commit its output over the kept file.

Content (invented, the demo scenario): two short synthetic recordings of the fictional cell
NL-0417, one nodal-like and one atrial-like, each with conditions and user review decisions.
Beside it, ``results_v1_beats.csv`` and ``results_v1_summary.csv`` are what ``upstroke export``
wrote from it with the code of the time (``upstroke export results_v1.h5 --csv ... --summary-csv
...``), so that a newer version can be checked to export the same tables.
"""

from __future__ import annotations

import os
import sys

from analysis.conditions import parse_condition
from analysis.session import Session
from analysis.synthetic import preset, synthesize

HERE = os.path.dirname(os.path.abspath(__file__))


def make(path: str) -> None:
    session = Session()
    nodal = synthesize(preset("nodal-like"), duration_s=6.0, fs_hz=5_000.0, seed=11).recording
    atrial = synthesize(preset("atrial-like"), duration_s=6.0, fs_hz=5_000.0, seed=12).recording
    a = session.add(nodal, label="NL-0417-baseline.abf",
                    conditions=[parse_condition("baseline=0-3s"), parse_condition("UP-113=3-end,steady=last2s")])
    b = session.add(atrial, label="NL-0417-washout.abf", conditions=[parse_condition("washout=0-end")])
    session.reject(a, [1, 2], "electrode bump")
    session.accept(b, [0])
    session.save(path)


if __name__ == "__main__":
    make(sys.argv[1] if len(sys.argv) > 1 else os.path.join(HERE, "results_v1.h5"))
