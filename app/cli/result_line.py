"""The one-line result that ``analyze`` and ``batch`` print: beats, and where they stand.

Both commands say how many beats were found, how many the summaries use, how many were rejected
and how many wait for review (held by a flag of ``quality.review_flags``), in the same words;
``analyze`` adds the mean cycle length with the rate that corresponds to it.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["beat_counts", "counts_text", "cl_and_rate_text"]


def beat_counts(table) -> dict[str, int]:
    """``{"beats", "used", "rejected", "to_review"}`` of a beat table (its ``verdict`` column)."""
    from analysis.decisions import ACCEPTED, REJECTED, TO_REVIEW

    n = len(table)
    if n and "verdict" in table:
        v = np.asarray(table["verdict"], dtype=object)
        used, rejected, waiting = (int(np.count_nonzero(v == s)) for s in (ACCEPTED, REJECTED, TO_REVIEW))
    else:
        used = int(np.count_nonzero(np.asarray(table["accepted"]) == 1)) if n else 0
        rejected, waiting = n - used, 0
    return {"beats": n, "used": used, "rejected": rejected, "to_review": waiting}


def counts_text(counts: dict[str, int]) -> str:
    """``"189 beats (171 used, 3 rejected, 15 waiting for review)"``.

    Examples
    --------
    >>> counts_text({"beats": 12, "used": 10, "rejected": 1, "to_review": 1})
    '12 beats (10 used, 1 rejected, 1 waiting for review)'
    """
    n = counts["beats"]
    return (f"{n} beat{'s' * (n != 1)} ({counts['used']} used, {counts['rejected']} rejected, "
            f"{counts['to_review']} waiting for review)")


def cl_and_rate_text(mean_cl_ms: float, label: str = "CL") -> str:
    """``"CL 412.3 ms (145.5 bpm)"``: the rate printed is 60000 / the CL printed, so the two agree.

    Examples
    --------
    >>> cl_and_rate_text(400.0)
    'CL 400.0 ms (150.0 bpm)'
    >>> cl_and_rate_text(float("nan"))
    'CL n/a'
    """
    if not (math.isfinite(mean_cl_ms) and mean_cl_ms > 0):
        return f"{label} n/a"
    return f"{label} {mean_cl_ms:.1f} ms ({60000.0 / mean_cl_ms:.1f} bpm)"
