"""Beat-to-beat variability and cross-beat relations, on plain arrays.

Every function here takes values of consecutive beats (cycle lengths, APD90s) and returns one
number, NaN when there are too few values. Pairs of successive values are only formed between
beats that really follow each other: callers pass a boolean ``consecutive`` mask (beat ``n`` and
``n + 1`` adjacent in the same sweep, both accepted) so that a rejected beat or a sweep boundary
never produces a spurious difference.

Definitions
-----------
* SDNN and RMSSD as defined by the Task Force of the European Society of Cardiology and the North
  American Society of Pacing and Electrophysiology (1996), Eur Heart J 17:354, applied to the
  cycle lengths of spontaneous beats instead of RR intervals. SDNN is the sample standard
  deviation (``ddof=1``) of the intervals; RMSSD the square root of the mean squared difference
  of successive intervals.
* Poincare SD1 and SD2 (Brennan, Palaniswami & Kamen 2001, IEEE Trans Biomed Eng 48:1342, from
  memory): the standard deviations of the Poincare points ``(CL_n, CL_n+1)`` across and along the
  identity line, i.e. of ``(CL_n+1 - CL_n) / sqrt 2`` and ``(CL_n+1 + CL_n) / sqrt 2``. They are
  population standard deviations (``ddof=0``) of the pairs, so that
  ``SD1**2 = RMSSD**2 / 2 - mean(dCL)**2 / 2`` holds exactly and SD1 = RMSSD / sqrt 2 whenever
  the successive differences average zero.
* Short-term variability of APD90 (Thomsen et al. 2004, Circulation 110:2453, from memory):
  ``STV = sum |APD_n+1 - APD_n| / (N sqrt 2)`` with N the number of successive pairs, the mean
  distance of the Poincare points from the identity line.
* Variability in pacemaker cells falls with rate (Monfredi et al. 2014, Hypertension 64:1334), so
  summaries always report the mean rate beside these numbers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "CellTypeRule",
    "cell_type_hint",
    "coefficient_of_variation_pct",
    "linear_relation",
    "poincare_sd1_sd2",
    "rmssd",
    "sdnn",
    "successive_pairs",
    "stv",
]

_SQRT2 = math.sqrt(2.0)


def successive_pairs(values: np.ndarray, consecutive: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The pairs ``(x_n, x_n+1)`` of successive values whose link is valid.

    Parameters
    ----------
    values : ndarray, shape (n,)
        One value per beat, in time order. NaN values break a pair.
    consecutive : ndarray of bool, shape (n - 1,), or None
        ``consecutive[i]`` is True when beat ``i + 1`` directly follows beat ``i`` (same sweep,
        no beat between them left out). None treats every neighbour as consecutive.

    Returns
    -------
    (ndarray, ndarray)
        ``x_n`` and ``x_n+1`` of the valid pairs.
    """
    x = np.asarray(values, dtype=np.float64).reshape(-1)
    if x.size < 2:
        return np.empty(0), np.empty(0)
    ok = np.isfinite(x[:-1]) & np.isfinite(x[1:])
    if consecutive is not None:
        link = np.asarray(consecutive, dtype=bool).reshape(-1)
        if link.size != x.size - 1:
            raise ValueError(f"consecutive has {link.size} entries, expected {x.size - 1}")
        ok &= link
    return x[:-1][ok], x[1:][ok]


def sdnn(values: np.ndarray) -> float:
    """SDNN: the sample standard deviation of the intervals (Task Force ESC/NASPE 1996).

    Parameters
    ----------
    values : ndarray
        Intervals, in any time unit; NaN values are left out.

    Returns
    -------
    float
        Same unit as the input; NaN for fewer than two values.

    Examples
    --------
    >>> round(sdnn(np.array([800.0, 820.0, 780.0, 800.0])), 6)
    16.329932
    """
    x = np.asarray(values, dtype=np.float64)
    x = x[np.isfinite(x)]
    return float(np.std(x, ddof=1)) if x.size >= 2 else math.nan


def coefficient_of_variation_pct(values: np.ndarray) -> float:
    """CV = SDNN / mean, in percent; NaN for fewer than two values or a zero mean."""
    x = np.asarray(values, dtype=np.float64)
    x = x[np.isfinite(x)]
    if x.size < 2:
        return math.nan
    mean = float(np.mean(x))
    return 100.0 * float(np.std(x, ddof=1)) / mean if mean != 0 else math.nan


def rmssd(values: np.ndarray, consecutive: np.ndarray | None = None) -> float:
    """RMSSD: root mean square of successive differences (Task Force ESC/NASPE 1996).

    Parameters
    ----------
    values : ndarray
        Intervals of successive beats, in time order.
    consecutive : ndarray of bool or None
        Which neighbours are valid pairs; see :func:`successive_pairs`.

    Returns
    -------
    float
        Same unit as the input; NaN without any valid pair.

    Examples
    --------
    >>> rmssd(np.array([800.0, 810.0, 790.0]))  # differences +10, -20
    15.811388300841896
    """
    a, b = successive_pairs(values, consecutive)
    return float(np.sqrt(np.mean((b - a) ** 2))) if a.size else math.nan


def poincare_sd1_sd2(values: np.ndarray, consecutive: np.ndarray | None = None) -> tuple[float, float]:
    """Poincare SD1 (across the identity line) and SD2 (along it), Brennan et al. 2001.

    Parameters
    ----------
    values : ndarray
        Intervals of successive beats, in time order.
    consecutive : ndarray of bool or None
        Which neighbours are valid pairs; see :func:`successive_pairs`.

    Returns
    -------
    (float, float)
        SD1 and SD2 in the input's unit (population standard deviations of the rotated Poincare
        coordinates); NaN without at least two valid pairs.
    """
    a, b = successive_pairs(values, consecutive)
    if a.size < 2:
        return math.nan, math.nan
    sd1 = float(np.std((b - a) / _SQRT2))
    sd2 = float(np.std((b + a) / _SQRT2))
    return sd1, sd2


def stv(values: np.ndarray, consecutive: np.ndarray | None = None) -> float:
    """Short-term variability: ``sum |x_n+1 - x_n| / (N sqrt 2)`` (Thomsen et al. 2004).

    Parameters
    ----------
    values : ndarray
        APD90 (or any duration) of successive beats, in time order.
    consecutive : ndarray of bool or None
        Which neighbours are valid pairs; see :func:`successive_pairs`.

    Returns
    -------
    float
        Same unit as the input; NaN without any valid pair.

    Examples
    --------
    >>> round(stv(np.array([300.0, 304.0, 298.0])), 6)  # (4 + 6) / (2 sqrt 2)
    3.535534
    """
    a, b = successive_pairs(values, consecutive)
    return float(np.sum(np.abs(b - a)) / (a.size * _SQRT2)) if a.size else math.nan


def linear_relation(x: np.ndarray, y: np.ndarray) -> tuple[float, float, int]:
    """Least-squares slope of ``y`` on ``x`` and Pearson's r, over the pairs where both are finite.

    Returns
    -------
    (float, float, int)
        Slope (units of y per unit of x), r, and the number of pairs used; slope and r are NaN
        for fewer than three pairs or when x (or y, for r) does not vary.
    """
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    n = int(x.size)
    if n < 3:
        return math.nan, math.nan, n
    dx = x - x.mean()
    dy = y - y.mean()
    sxx = float(np.dot(dx, dx))
    syy = float(np.dot(dy, dy))
    if sxx <= 0:
        return math.nan, math.nan, n
    slope = float(np.dot(dx, dy)) / sxx
    r = float(np.dot(dx, dy)) / math.sqrt(sxx * syy) if syy > 0 else math.nan
    return slope, r, n


@dataclass(frozen=True)
class CellTypeRule:
    """Thresholds of the cell-type hint for stem-cell-derived cardiomyocytes.

    Common thresholds, from memory (MEASUREMENTS.md): ventricular-like APD90/APD50 <= about
    1.3-1.4, atrial-like >= about 1.7, nodal-like dV/dt max below about 10 V/s with a depolarised
    MDP and a prominent phase 4. Labels on such cells are a continuum (Du et al. 2015, Biophys J;
    Gorospe et al. 2014, IEEE Trans Biomed Eng 61:2389), so the result is a hint with the rule.
    """

    ventricular_max_ratio: float = 1.4
    atrial_min_ratio: float = 1.7
    nodal_max_dvdt_V_per_s: float = 10.0
    nodal_min_mdp_mV: float = -65.0
    nodal_min_ddr_mV_per_s: float = 20.0


def cell_type_hint(
    *, apd90_ms: float, apd50_ms: float, dvdt_max_V_per_s: float, mdp_mV: float, ddr_mV_per_s: float,
    rule: CellTypeRule = CellTypeRule(),
) -> tuple[str, str]:
    """A cell-type hint and the rule that gave it, from a group's mean parameters.

    Parameters
    ----------
    apd90_ms, apd50_ms, dvdt_max_V_per_s, mdp_mV, ddr_mV_per_s : float
        Means over the accepted beats (NaN when unknown).
    rule : CellTypeRule
        The thresholds.

    Returns
    -------
    (str, str)
        ``"nodal-like"``, ``"atrial-like"``, ``"ventricular-like"`` or ``"unclassified"``, and the
        rule with the values it compared, for display beside the label.

    Examples
    --------
    >>> cell_type_hint(apd90_ms=150, apd50_ms=100, dvdt_max_V_per_s=5, mdp_mV=-58, ddr_mV_per_s=60)[0]
    'nodal-like'
    """
    if (
        math.isfinite(dvdt_max_V_per_s) and math.isfinite(mdp_mV) and math.isfinite(ddr_mV_per_s)
        and dvdt_max_V_per_s < rule.nodal_max_dvdt_V_per_s
        and mdp_mV > rule.nodal_min_mdp_mV
        and ddr_mV_per_s > rule.nodal_min_ddr_mV_per_s
    ):
        return "nodal-like", (
            f"dV/dt max {dvdt_max_V_per_s:.3g} V/s < {rule.nodal_max_dvdt_V_per_s:g}, "
            f"MDP {mdp_mV:.1f} mV > {rule.nodal_min_mdp_mV:g}, "
            f"DDR {ddr_mV_per_s:.3g} mV/s > {rule.nodal_min_ddr_mV_per_s:g}"
        )
    if not (math.isfinite(apd90_ms) and math.isfinite(apd50_ms) and apd50_ms > 0):
        return "unclassified", "APD90/APD50 undefined"
    ratio = apd90_ms / apd50_ms
    if ratio <= rule.ventricular_max_ratio:
        return "ventricular-like", f"APD90/APD50 {ratio:.2f} <= {rule.ventricular_max_ratio:g}"
    if ratio >= rule.atrial_min_ratio:
        return "atrial-like", f"APD90/APD50 {ratio:.2f} >= {rule.atrial_min_ratio:g}"
    return "unclassified", (
        f"APD90/APD50 {ratio:.2f} between {rule.ventricular_max_ratio:g} and {rule.atrial_min_ratio:g}"
    )
