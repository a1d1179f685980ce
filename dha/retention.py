"""Retention indices from n-alkane markers, and the automatic search for the markers.

The index of a peak is interpolated between the two n-alkane markers that bracket it:

* temperature-programmed part: the linear index of van den Dool and Kratz (1963),
  ``I = 100 [n + (N - n) (t - t_n) / (t_N - t_n)]`` on total retention times;
* isothermal start (both markers before ``isothermal_until_min``): the logarithmic index of
  Kovats (1958) on adjusted times ``t' = t - t_M``,
  ``I = 100 [n + (N - n) (ln t'_x - ln t'_n) / (ln t'_N - ln t'_n)]``.

A bracket that straddles the end of the isothermal hold uses the linear form. Peaks before the
first or after the last marker are extrapolated with the first / last bracket. Both forms with
non-adjacent markers carry the factor (N - n). Source: IUPAC Gold Book R05360 (PAC 1993, 65,
819, p. 844); van den Dool & Kratz, J. Chromatogr. 11 (1963) 463-471.

The hold-up time ``t_M``: the setting ``identify.holdup_time_min`` when > 0, else estimated from
three consecutive isothermal n-alkanes, whose adjusted times form a geometric series:
``t_M = (t_n t_{n+2} - t_{n+1}^2) / (t_n + t_{n+2} - 2 t_{n+1})`` (follows from
``t'_{n+1}^2 = t'_n t'_{n+2}``), else the first peak's time.
"""
from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from dha.errors import SettingsError

log = logging.getLogger("dha.retention")

@dataclass(frozen=True)
class IndexScale:
    """An rt <-> retention-index scale defined by n-alkane markers.

    Attributes
    ----------
    carbon : ndarray of int
        Carbon numbers of the markers, increasing.
    rt_min : ndarray of float
        Their retention times [min], increasing.
    isothermal_until_min : float
        End of the isothermal hold [min]; 0 = fully programmed.
    holdup_time_min : float
        Hold-up time t_M used for adjusted times [min].
    virtual : tuple of int
        Carbon numbers whose times were extrapolated (see :func:`extend_markers`), not seen.
    """

    carbon: np.ndarray
    rt_min: np.ndarray
    isothermal_until_min: float = 0.0
    holdup_time_min: float = 0.0
    virtual: tuple = ()
    search: Any = field(default=None, compare=False)

    def __post_init__(self) -> None:
        if len(self.carbon) < 2:
            raise SettingsError("retention index: at least two n-alkane markers are needed; "
                                "name them in the export or give identify.markers")
        if np.any(np.diff(self.carbon) <= 0) or np.any(np.diff(self.rt_min) <= 0):
            raise SettingsError(
                "retention index: n-alkane marker times must increase with carbon number; got "
                + ", ".join(f"C{c}={t:g}" for c, t in zip(self.carbon, self.rt_min))
                + "; check identify.markers or the names in the export")

    @property
    def markers(self) -> dict[int, float]:
        """{carbon number: rt [min]} of the markers seen in the run (not the extrapolated)."""
        return {int(c): float(t) for c, t in zip(self.carbon, self.rt_min)
                if int(c) not in self.virtual}

    def _bracket(self, x: np.ndarray, along: np.ndarray) -> np.ndarray:
        k = np.searchsorted(along, x, side="right") - 1
        return np.clip(k, 0, len(along) - 2)

    def _is_log(self, k: np.ndarray) -> np.ndarray:
        if self.isothermal_until_min <= 0:
            return np.zeros_like(k, dtype=bool)
        return self.rt_min[k + 1] <= self.isothermal_until_min

    def index(self, rt_min: Any) -> np.ndarray:
        """Retention index of each time.

        >>> s = IndexScale(np.array([6, 7]), np.array([10.0, 14.0]))
        >>> s.index([12.0, 10.0, 15.0]).tolist()
        [650.0, 600.0, 725.0]
        """
        t = np.asarray(rt_min, dtype=float)
        k = self._bracket(t, self.rt_min)
        n, big_n = self.carbon[k], self.carbon[k + 1]
        tn, tN = self.rt_min[k], self.rt_min[k + 1]
        frac = (t - tn) / (tN - tn)
        use_log = self._is_log(k)
        if np.any(use_log):
            tm = self.holdup_time_min
            with np.errstate(invalid="ignore", divide="ignore"):
                lx = np.log(np.where(t - tm > 0, t - tm, np.nan))
                fl = (lx - np.log(tn - tm)) / (np.log(tN - tm) - np.log(tn - tm))
            frac = np.where(use_log, fl, frac)
        return 100.0 * (n + (big_n - n) * frac)

    def rt(self, index: Any) -> np.ndarray:
        """Retention time [min] of each index (the inverse of :meth:`index`).

        >>> s = IndexScale(np.array([6, 7]), np.array([10.0, 14.0]))
        >>> s.rt([650.0]).tolist()
        [12.0]
        """
        i = np.asarray(index, dtype=float)
        k = self._bracket(i, 100.0 * self.carbon)
        n, big_n = self.carbon[k], self.carbon[k + 1]
        tn, tN = self.rt_min[k], self.rt_min[k + 1]
        frac = (i / 100.0 - n) / (big_n - n)
        out = tn + frac * (tN - tn)
        use_log = self._is_log(k)
        if np.any(use_log):
            tm = self.holdup_time_min
            lt = np.log(tn - tm) + frac * (np.log(tN - tm) - np.log(tn - tm))
            out = np.where(use_log, tm + np.exp(lt), out)
        return out


def estimate_holdup(markers: Mapping[int, float], isothermal_until_min: float,
                    first_peak_min: float | None = None) -> float:
    """Hold-up time [min] from three consecutive isothermal n-alkanes (see module notes).

    >>> round(estimate_holdup({4: 5.0, 5: 7.0, 6: 11.0}, 20.0), 6)   # t' = 2, 4, 8 with t_M = 3
    3.0
    """
    iso = sorted((c, t) for c, t in markers.items() if t <= isothermal_until_min)
    estimates = []
    for (c0, t0), (c1, t1), (c2, t2) in zip(iso, iso[1:], iso[2:]):
        if c1 == c0 + 1 and c2 == c1 + 1:
            den = t0 + t2 - 2 * t1
            if den > 0:
                tm = (t0 * t2 - t1 * t1) / den
                if 0 < tm < t0:
                    estimates.append(tm)
    if estimates:
        return float(np.median(estimates))
    if first_peak_min is not None and np.isfinite(first_peak_min):
        first = min([first_peak_min] + [t for _, t in iso])
        return float(first) * 0.999
    return 0.0


def extend_markers(markers: Mapping[int, float], isothermal_until_min: float = 0.0,
                   holdup_time_min: float = 0.0, n_extra: int = 2) -> dict[int, float]:
    """Extrapolated n-alkane times beyond the first and last marker [min].

    The spacing of consecutive n-alkanes changes by a slowly varying factor: constant in an
    isothermal hold (Kovats: log t' linear in n), close to but below 1 late in a temperature
    programme. Beyond the last marker the last spacing ratio
    ``r = (t_N - t_(N-1)) / (t_(N-1) - t_(N-2))`` is kept (capped at 1):
    ``t_(N+1) = t_N + r (t_N - t_(N-1))``. Before the first marker inside an isothermal hold the
    adjusted times form a geometric series, ``t'_(n-1) = t'_n^2 / t'_(n+1)``; in a programmed
    start the first spacing ratio is used the same way. When the last four markers show a
    shrinking spacing whose ratio rises (a settled programme), ``ln r`` keeps its last rise per
    step (at most 0.05), capped at r = 1. Extrapolated times must keep moving
    away from the markers; those that do not are dropped.

    >>> ext = extend_markers({6: 10.0, 7: 20.0, 8: 29.0, 9: 37.0}, n_extra=1)
    >>> sorted(ext), round(ext[10], 3)
    ([10], 44.111)
    """
    items = sorted((int(c), float(t)) for c, t in markers.items())
    out: dict[int, float] = {}
    if len(items) < 3:
        return out
    c = [x for x, _ in items]
    t = [y for _, y in items]
    if c[-1] - c[-3] == 2:
        d1, d2 = t[-2] - t[-3], t[-1] - t[-2]
        r = min(d2 / d1, 1.0) if d1 > 0 else 1.0
        # a shrinking spacing under a programme shrinks ever less (the ratio rises towards 1):
        # keep the last rise of ln r when four markers show it (at most 0.05 per step)
        dq = 0.0
        if len(c) >= 4 and c[-1] - c[-4] == 3 and r < 1.0 and t[-3] - t[-4] > 0:
            dq = float(np.clip(np.log(r) - np.log(d1 / (t[-3] - t[-4])), 0.0, 0.05))
        last, d = t[-1], d2
        for k in range(1, n_extra + 1):
            r = min(r * math.exp(dq), 1.0)
            d *= r
            last += d
            out[c[-1] + k] = last
    if c[2] - c[0] == 2:
        iso = isothermal_until_min > 0 and t[1] <= isothermal_until_min and holdup_time_min > 0
        if iso:
            a, b = t[0] - holdup_time_min, t[1] - holdup_time_min
            for k in range(1, n_extra + 1):
                a, b = a * a / b, a
                out[c[0] - k] = holdup_time_min + a
        else:
            d1, d2 = t[1] - t[0], t[2] - t[1]
            r = min(d2 / d1, 1.0) if d1 > 0 else 1.0
            first, d = t[0], d1
            for k in range(1, n_extra + 1):
                d /= r
                first -= d
                if first <= 0:
                    break
                out[c[0] - k] = first
    return {k: v for k, v in out.items() if k >= 1}


def infer_hold(markers: Mapping[int, float], first_peak_min: float | None = None,
               ratio_range=(1.5, 4.0), max_dev: float = 0.05) -> tuple[float, float] | None:
    """(end [min], hold-up time [min]) of an isothermal hold the n-alkane times show, or None.

    In a hold the adjusted times of consecutive n-alkanes are geometric (Kovats), so their
    spacings grow by a constant factor. The hold is the longest run of consecutive markers
    from the first whose spacing ratios lie in ``ratio_range`` and agree within ``max_dev``
    in ln; at least four markers (two ratios) are needed. The hold is taken to end just after
    its last marker (the bracket beyond is then linear); the hold-up time comes from
    :func:`estimate_holdup` and must lie before the first peak.

    >>> end, tm = infer_hold({3: 4.397, 4: 5.091, 5: 7.0, 6: 12.25, 7: 23.4, 8: 34.7})
    >>> round(end, 2), round(tm, 2)
    (12.25, 4.0)
    """
    items = sorted((int(c), float(t)) for c, t in markers.items())
    if len(items) < 4:
        return None
    c = [x for x, _ in items]
    t = [y for _, y in items]
    ratios = []
    for k in range(1, len(t) - 1):
        if c[k + 1] - c[k - 1] != 2:
            break
        d0, d1 = t[k] - t[k - 1], t[k + 1] - t[k]
        r = d1 / d0 if d0 > 0 else np.inf
        if not ratio_range[0] <= r <= ratio_range[1]:
            break
        if ratios and abs(np.log(r) - np.log(ratios[0])) > max_dev:
            break
        ratios.append(r)
    if len(ratios) < 2:
        return None
    end = t[len(ratios) + 1] * (1.0 + 1e-6)
    tm = estimate_holdup(dict(items[: len(ratios) + 2]), end, None)
    first = min(t[0], first_peak_min) if first_peak_min is not None else t[0]
    if not 0 < tm < first:
        return None
    return end, tm


def make_scale(markers: Mapping[int, float], settings: Mapping[str, Any] | None = None,
               first_peak_min: float | None = None, extend: int = 2) -> IndexScale:
    """An :class:`IndexScale` from markers and the ``[identify]`` settings section.

    ``extend`` extrapolated markers (:func:`extend_markers`) are added at each end, so peaks
    outside the marker range are indexed with a bracket of the expected width.
    """
    s = settings or {}
    iso = float(s.get("isothermal_until_min", 0.0) or 0.0)
    tm = float(s.get("holdup_time_min", 0.0) or 0.0)
    items = sorted((int(c), float(t)) for c, t in markers.items())
    carbon = np.array([c for c, _ in items], dtype=int)
    rt = np.array([t for _, t in items], dtype=float)
    if iso > 0 and tm <= 0:
        tm = estimate_holdup(dict(items), iso, first_peak_min)
    if iso > 0 and len(rt) and tm >= rt[0]:
        raise SettingsError(f"identify.holdup_time_min = {tm:g} min is not before the first "
                            f"n-alkane marker ({rt[0]:g} min); lower it")
    virtual: tuple = ()
    if extend > 0 and len(items) >= 3:
        ext = extend_markers(dict(items), iso, tm, extend)
        if ext:
            virtual = tuple(sorted(ext))
            items = sorted(items + list(ext.items()))
            carbon = np.array([c for c, _ in items], dtype=int)
            rt = np.array([t for _, t in items], dtype=float)
    return IndexScale(carbon, rt, iso, tm, virtual)


def parse_markers(raw: Mapping[Any, Any] | None) -> dict[int, float]:
    """The ``identify.markers`` setting ({"5" = 12.3, ...}) as {5: 12.3}; errors name the key."""
    out: dict[int, float] = {}
    for key, value in (raw or {}).items():
        try:
            c = int(str(key).strip().lstrip("Cc"))
        except ValueError:
            raise SettingsError(f"identify.markers: key {key!r} is not a carbon number; "
                                "write e.g. markers = {{ 5 = 12.31 }}") from None
        if not isinstance(value, (int, float)) or isinstance(value, bool) or value <= 0:
            raise SettingsError(f"identify.markers: C{c} = {value!r} is not a positive "
                                "retention time in minutes")
        if not 1 <= c <= 60:
            raise SettingsError(f"identify.markers: carbon number {c} is out of range 1-60")
        out[c] = float(value)
    return out


# --------------------------------------------------------------------------------------------
# Automatic marker search
# --------------------------------------------------------------------------------------------

def align_indices(peak_index: np.ndarray, lib_index: np.ndarray, tolerance: float, *,
                  weight: np.ndarray | None = None, lo: np.ndarray | None = None,
                  hi: np.ndarray | None = None, lib_index_hi: np.ndarray | None = None,
                  lib_bonus: np.ndarray | None = None, sigma: float | None = None,
                  peak_share: np.ndarray | None = None, lib_cap: np.ndarray | None = None,
                  cap_penalty: float = 0.0, peak_bonus: np.ndarray | None = None,
                  lib_sd_ratio: np.ndarray | None = None,
                  lib_size_limit: np.ndarray | None = None, size_slope: float = 0.0,
                  score_only: bool = False) -> tuple[np.ndarray, float]:
    """Order-preserving one-to-one assignment of peaks to library entries by their indices.

    Parameters
    ----------
    peak_index : ndarray, shape (P,)
        Retention index of each peak, in elution order (NaN = cannot be matched) [-].
    lib_index : ndarray, shape (C,)
        Library indices, sorted increasing [-].
    tolerance : float
        Half-width of the matching window [index units].
    weight : ndarray, shape (P,), optional
        Weight of each peak's gain (default 1).
    lo, hi : ndarray of int, shape (P,), optional
        Allowed library positions ``lo <= j < hi`` per peak (anchors from named peaks).
    lib_index_hi : ndarray, shape (C,), optional
        Upper ends when library entries are intervals ``[lib_index, lib_index_hi]`` (a
        co-eluting pair is one entry spanning both indices); the distance is then to the
        interval (0 inside).
    lib_bonus : ndarray, shape (C,), optional
        Log prior odds added to the gain of matching each library entry (e.g. for indices
        the lab has learnt on its own column).
    sigma : float, optional
        Standard deviation assumed for index errors [index units]; default ``tolerance / 2``.
    peak_share, lib_cap, cap_penalty : ndarray (P,), ndarray (C,), float, optional
        Share of each peak in the run's area [%] and the largest share each entry may
        plausibly hold [%] (inf = no limit): a match of a peak larger than the entry's limit
        loses ``cap_penalty`` (log odds).
    peak_bonus : ndarray, shape (P,), optional
        Log odds added to every match of a peak (against leaving it unknown), e.g. for a
        large peak, which is rarely an unknown.
    lib_sd_ratio : ndarray, shape (C,), optional
        Each entry's index sd over ``sigma`` (>= 1; e.g. an estimated index on a column whose
        other entries the lab learnt): the gain becomes the log-likelihood ratio of that wider
        Gaussian, ``kappa (1 - d^2 / (r tol)^2) - ln r``, within the window where it is
        positive. Default 1 for all.
    lib_size_limit, size_slope : ndarray (C,), float, optional
        The share of the area [%] up to which each entry is plausible (e.g. a few times the
        largest share real fuels hold of it): a larger peak loses ``size_slope * ln(share /
        limit)`` on that entry, less the least such loss among the peak's candidates (the size
        ranks the candidates; needs ``peak_share``).
    score_only : bool
        Only the score is wanted (the marker search compares many scales): one row of the
        programme is kept and no assignment is traced back; ``assign`` is then all -1. The
        score is the same as with the full table.

    Returns
    -------
    assign : ndarray of int, shape (P,)
        Library position of each peak, -1 if unmatched.
    score : float
        Total gain of the assignment.

    Notes
    -----
    Maximises ``sum w_p [(tol^2 - d_pc^2) / (2 sigma^2) + b_c]`` over non-crossing matchings
    with ``|d_pc| <= tol``, ``d_pc = I_p - I_c``. With Gaussian index errors of spread
    ``sigma`` and unknown peaks spread evenly, the first term is the log-likelihood ratio
    "peak is c" against "peak is unknown", with the window edge as the point where both are
    equally likely; ``b_c`` (``lib_bonus``) is the log prior odds of entry c. The dynamic
    programme is the longest-common-subsequence recurrence ``G[p, c] = max(G[p-1, c], G[p, c-1], G[p-1, c-1] + g_pc)``, computed one peak
    row at a time with a running maximum; O(P C) time and memory.

    >>> a, s = align_indices(np.array([500.2, 601.0, 650.0]), np.array([500.0, 600.0, 700.0]), 3.0)
    >>> a.tolist()
    [0, 1, -1]
    """
    p_idx = np.asarray(peak_index, dtype=float)
    c_idx = np.asarray(lib_index, dtype=float)
    n_p, n_c = len(p_idx), len(c_idx)
    assign = np.full(n_p, -1, dtype=int)
    if n_p == 0 or n_c == 0:
        return assign, 0.0
    w = np.ones(n_p) if weight is None else np.asarray(weight, dtype=float)
    lo = np.zeros(n_p, dtype=int) if lo is None else np.asarray(lo, dtype=int)
    hi = np.full(n_p, n_c, dtype=int) if hi is None else np.asarray(hi, dtype=int)
    # window of candidate library positions per peak
    c_hi = c_idx if lib_index_hi is None else np.maximum(np.asarray(lib_index_hi, float), c_idx)
    run_hi = np.maximum.accumulate(c_hi)
    bonus = None if lib_bonus is None else np.asarray(lib_bonus, dtype=float)
    sig = tolerance / 2.0 if sigma is None else float(sigma)
    kappa = tolerance ** 2 / (2.0 * sig ** 2)
    ratio = None if lib_sd_ratio is None else np.maximum(np.asarray(lib_sd_ratio, float), 1.0)
    reach = tolerance * (float(ratio.max()) if ratio is not None and len(ratio) else 1.0)
    left = np.maximum(np.searchsorted(run_hi, p_idx - reach, side="left"), lo)
    right = np.minimum(np.searchsorted(c_idx, p_idx + reach, side="right"), hi)
    finite = np.isfinite(p_idx)
    # every (peak, window entry) gain at once; the row loop then only adds and propagates
    count = np.where(finite, np.maximum(right - left, 0), 0)
    offs = np.concatenate([[0], np.cumsum(count)])
    rep = np.repeat(np.arange(n_p), count)
    js_all = left[rep] + (np.arange(offs[-1]) - offs[rep])
    d_all = np.maximum(np.maximum(c_idx[js_all] - p_idx[rep], p_idx[rep] - c_hi[js_all]),
                       0.0) / tolerance
    if ratio is None:
        g_all = kappa * (1.0 - d_all * d_all)
        inside = d_all <= 1.0
    else:
        r = ratio[js_all]
        g_all = kappa * (1.0 - (d_all / r) ** 2) - np.log(r)
        inside = g_all >= 0.0
    if bonus is not None:
        g_all = g_all + bonus[js_all]
    if lib_cap is not None and peak_share is not None and cap_penalty:
        over = np.asarray(peak_share, float)[rep] > np.asarray(lib_cap, float)[js_all]
        g_all = g_all - cap_penalty * over
    if peak_bonus is not None:
        g_all = g_all + np.asarray(peak_bonus, float)[rep]
    if lib_size_limit is not None and peak_share is not None and size_slope and len(js_all):
        pen = size_slope * np.log(np.maximum(
            np.asarray(peak_share, float)[rep] / np.asarray(lib_size_limit, float)[js_all], 1.0))
        # relative to the peak's most plausible candidate: the size ranks the candidates, it
        # does not make the peak an unknown
        nz = count > 0
        low = np.zeros(n_p)
        low[nz] = np.minimum.reduceat(pen, offs[:-1][nz])
        g_all = g_all - (pen - low[rep])
    g_all = np.where(inside, w[rep] * g_all, -np.inf)
    if score_only:
        # the same recurrence in place: row[a:b] still holds the previous peak's values when
        # the candidate gains are added; peaks without a window entry leave the row as it is
        row = np.zeros(n_c + 1)
        nz = np.flatnonzero(count)
        for a, b, o_a, o_b in zip(left[nz].tolist(), right[nz].tolist(), offs[nz].tolist(),
                                  offs[nz + 1].tolist()):
            seg = row[a + 1:b + 1]
            np.maximum(seg, row[a:b] + g_all[o_a:o_b], out=seg)
            tail = row[a + 1:]
            np.maximum.accumulate(tail, out=tail)
        return assign, float(row[n_c])
    g_rows = np.empty((n_p + 1, n_c + 1))
    g_rows[0] = 0.0
    for p in range(n_p):
        prev, row = g_rows[p], g_rows[p + 1]
        row[:] = prev
        if count[p]:
            a, b = left[p], right[p]
            seg = row[a + 1:b + 1]
            np.maximum(seg, prev[a:b] + g_all[offs[p]:offs[p + 1]], out=seg)
            tail = row[a + 1:]
            np.maximum.accumulate(tail, out=tail)
    # backtrack
    p, c = n_p, n_c
    while p > 0 and c > 0:
        if g_rows[p, c] == g_rows[p, c - 1]:
            c -= 1
        elif g_rows[p, c] == g_rows[p - 1, c]:
            p -= 1
        else:
            assign[p - 1] = c - 1
            p -= 1
            c -= 1
    return assign, float(g_rows[n_p, n_c])


class _Lookup:
    """Grid over the index axis: match quality g and the nearest library entry's position.

    ``g(I) = max(0, 1 - (d / tol)^2)`` with d the distance to the nearest library index.
    """

    def __init__(self, lib: np.ndarray, tolerance: float, lo: float, hi: float,
                 step: float = 0.05) -> None:
        self.lo, self.step = lo, step
        grid = np.arange(lo, hi + step, step)
        k = np.clip(np.searchsorted(lib, grid), 1, len(lib) - 1) if len(lib) > 1 else \
            np.zeros(len(grid), dtype=int)
        left, right = lib[np.maximum(k - 1, 0)], lib[k]
        take_left = np.abs(grid - left) <= np.abs(right - grid)
        d = np.where(take_left, np.abs(grid - left), np.abs(right - grid))
        self.g = np.clip(1.0 - (d / tolerance) ** 2, 0.0, None)
        self.near = np.where(take_left, np.maximum(k - 1, 0), k)
        per = int(round(100 / step))
        self.gbar = np.array([self.g[i:i + per].mean() for i in range(0, len(grid), per)])

    def at(self, index: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(g, nearest entry, baseline g of the index's hundred) at each index."""
        pos = np.clip(((index - self.lo) / self.step).astype(int), 0, len(self.g) - 1)
        hund = np.clip(((index - self.lo) / 100.0).astype(int), 0, len(self.gbar) - 1)
        return self.g[pos], self.near[pos], self.gbar[hund]


def _grouped_score(group: np.ndarray, near: np.ndarray, wg: np.ndarray, wbase: np.ndarray,
                   n_groups: int) -> np.ndarray:
    """Sum per group of: best w g among consecutive peaks sharing a library entry, minus base.

    Peaks (sorted within each group) whose nearest library entry is the same count once,
    with their best match: a scale that crowds many peaks onto few entries gains nothing.
    """
    if len(group) == 0:
        return np.zeros(n_groups)
    new_run = np.ones(len(group), dtype=bool)
    new_run[1:] = (group[1:] != group[:-1]) | (near[1:] != near[:-1])
    starts = np.flatnonzero(new_run)
    best = np.maximum.reduceat(wg, starts)
    out = np.bincount(group[starts], weights=best, minlength=n_groups)
    return out - np.bincount(group, weights=wbase, minlength=n_groups)


#: Core chains of the marker programme scored by the full alignment (:func:`find_markers`,
#: step 2), and how many of the best of them also without their first or last marker. The
#: programme ranks chains by their brackets alone; on sparse real-fuel runs the right chain
#: ranked below the sixth (tuning seeds 2040-2041: automatic markers 0.28 -> 0.41 of the mass
#: right at index sd 0.5 with 24 chains).
FINAL_CHAINS = 24
VARIANT_CHAINS = 6


def find_markers(rt_min: np.ndarray, size: np.ndarray, lib_index: np.ndarray, tolerance: float,
                 settings: Mapping[str, Any] | None = None, *,
                 alkane_carbons: list[int] | None = None, n_candidates: int = 48,
                 n_score: int = 200, n_final: int = FINAL_CHAINS,
                 lib_bonus: np.ndarray | None = None,
                 hold_factors: tuple = (2.0, 3.0, 4.5),
                 holdup_factors: tuple = (0.8, 0.85, 0.9, 0.95)) -> IndexScale | None:
    """Find the n-alkane markers of an unnamed run.

    Parameters
    ----------
    rt_min, size : ndarray
        Retention times [min] (sorted) and areas of all peaks.
    lib_index : ndarray
        The library's retention indices (any order) [-].
    tolerance : float
        Matching window half-width used to score a hypothesis [index units].
    settings : dict, optional
        The ``[identify]`` section (isothermal hold, hold-up time).
    alkane_carbons : list of int, optional
        Carbon numbers of the library's n-alkanes (default 3-13).
    n_candidates : int
        The tallest peaks considered as the core markers.
    n_score : int
        The largest peaks used to compare whole marker sets.
    n_final : int
        Core chains compared by the full alignment.
    lib_bonus : ndarray, optional
        Log prior odds of each library entry (same order as ``lib_index``), used in the
        full alignment as in :func:`align_indices`.

    Returns
    -------
    IndexScale or None
        The best scale, or None when no chain of three markers is found.

    Notes
    -----
    1. Core chain (:func:`_chain_dp`): among the ``n_candidates`` tallest peaks, a dynamic
       programme over states (label n, peak as n-alkane n - 1, peak as n-alkane n) finds
       labelled chains whose spacings obey the physics of the run and whose brackets index
       the peaks between them onto library entries. Spacing rules, with
       ``q = ln((t_(n+1) - t_n) / (t_n - t_(n-1)))``: inside the isothermal hold the adjusted
       times are geometric (Kovats), so consecutive spacings grow by a constant factor
       (``|q - q_prev| <= 0.05``, ``q >= ln 1.3``) equal to the ratio of adjusted times, and
       with a known hold-up time that ratio per CH2 lies in 1.5-4 (from memory: about 2.5-3
       for n-alkanes on methylsilicone near 35 degC); the spacing after an n-alkane eluting
       after the hold is at most 1.1 x the one before it; under the programme the spacing
       shrinks slowly (``0.7 <= e^q <= 1.02``; once shrinking,
       ``-0.03 <= q - q_prev <= 0.05``); everywhere q never rises by more than 0.08 from one
       step to the next (a peak wrongly taken into the series makes a short spacing followed
       by a long one). The rules are those of linear temperature programmes (from memory);
       a programme with several ramps or a late hold breaks the "settled" rule. A bracket
       (a, b) labelled n scores ``sum over library entries hit of the best w_p g(I_p)``
       minus ``sum_p w_p gbar_n`` (``g = max(0, 1 - (d/tol)^2)``, d the distance to the
       nearest library index, ``gbar_n`` the mean of g over the hundred; peaks sharing their
       nearest entry count once; ``w = ln(1 + size / median)``; the ``n_score`` largest
       peaks), so a bracket of the wrong width or label scores about zero; each marker earns
       ``0.5 w`` (n-alkanes are tall peaks).
    2. The ``n_final`` best distinct chains, each also without its first or last member, are
       compared by the one-to-one alignment (:func:`align_indices`, with ``lib_bonus`` and
       size weights) of the ``n_score`` largest peaks indexed with them.
    3. Extension (:func:`_extend_chain`): the best chain grows one n-alkane at a time at
       either end, among the peaks the spacing rules allow there and at least 0.1 x the end
       marker's area, judged by the alignment of the peaks up to (down to) the new marker
       only (beyond it both hypotheses merely extrapolate); small first and late n-alkanes
       are found this way.
    With an isothermal hold but no hold-up time set, the programme runs twice: the second
    time with ``t_M`` from the first chain's hold markers (:func:`estimate_holdup`). Without
    ``isothermal_until_min`` (and ``detect_hold`` true) holds ending at ``hold_factors`` x the
    first peak's time are tried besides none, each scored by its best two core chains (step
    1-2); for a hold found, hold-up times of ``holdup_factors`` x the first peak's time are
    tried the same way (the first peaks of petrol, C3/C4, are barely retained: common
    practice, no source); the best setting gets the full search, and the returned scale
    carries the hold and the hold-up time (from three n-alkanes in the hold when found).
    The search is a heuristic: the identify step lists the markers it found in a warning.
    Measured on synthetic petrol runs (tests/test_identify.py, seeds 0-9): markers right in
    30/30 runs at index noise sd 0.5 with 0.5 % drift (30/30 also with the hold not given),
    24/30 at sd 1.5 with the hold given (26/30 on seeds 200-209), 21/30 without.
    """
    s = settings or {}
    rt = np.asarray(rt_min, dtype=float)
    sz = np.nan_to_num(np.asarray(size, dtype=float), nan=0.0)
    n_pk = len(rt)
    if n_pk < 5:
        return None
    carbons = sorted(alkane_carbons or range(3, 14))
    lib_all = np.asarray(lib_index, dtype=float)
    fin = np.isfinite(lib_all)
    order = np.argsort(lib_all[fin], kind="stable")
    lib = lib_all[fin][order]
    bonus = None if lib_bonus is None else np.asarray(lib_bonus, dtype=float)[fin][order]
    if len(lib) < 2:
        return None
    iso = float(s.get("isothermal_until_min", 0.0) or 0.0)
    tm_set = float(s.get("holdup_time_min", 0.0) or 0.0)
    first = float(np.nanmin(rt))
    top = np.sort(np.argsort(-sz, kind="stable")[: min(n_score, n_pk)])
    med = np.median(sz[top][sz[top] > 0]) if np.any(sz[top] > 0) else 1.0
    w_all = np.log1p(sz / med)
    look = _Lookup(lib, tolerance, 100.0 * (carbons[0] - 1), 100.0 * (carbons[-1] + 2))
    cand = np.sort(np.argsort(-sz, kind="stable")[: min(n_candidates, n_pk)])
    t_top, w_top = rt[top], 1.0 + w_all[top]
    cand_top = np.searchsorted(top, cand)     # the candidates are among the n_score largest
    hypotheses = [dict(s)]
    if iso <= 0 and s.get("detect_hold", True):
        hypotheses += [{**s, "isothermal_until_min": first * f} for f in hold_factors]
    args = (rt, sz, first, top, t_top, w_top, w_all, cand_top, look, lib, bonus, tolerance,
            carbons, n_final)
    q_args = args
    s_cache: dict = {}
    chosen = hypotheses[0]
    if len(hypotheses) > 1:
        # hold hypotheses compared by their best core chains; the winner's hold-up time
        # is tried on a grid below the first peak (unless set)
        scored = [(_search_one(s_h, *q_args, quick=True, s_cache=s_cache)[0], k)
                  for k, s_h in enumerate(hypotheses)]
        best_sc, k = max(scored)
        chosen = hypotheses[k]
        log.debug("hold hypotheses (end min, score): %s",
                  [(round(float(h.get("isothermal_until_min")), 2), round(sc, 1))
                   for (sc, _), h in zip(scored, hypotheses)])
        if k > 0 and tm_set <= 0:
            for f in holdup_factors:
                s_h = {**chosen, "holdup_time_min": first * f}
                sc = _search_one(s_h, *q_args, quick=True, s_cache=s_cache)[0]
                if sc > best_sc:
                    best_sc, chosen = sc, s_h
    alts: list = []
    sc, markers = _search_one(chosen, *args, s_cache=s_cache, alts_out=alts)
    if markers is None:
        return None
    if chosen is not hypotheses[0] and tm_set <= 0:
        # a hold-up time from three consecutive n-alkanes in the hold beats the grid value
        tm_est = estimate_holdup(markers, float(chosen["isothermal_until_min"]), None)
        if tm_est > 0:
            chosen = {**chosen, "holdup_time_min": tm_est}
    scale = make_scale(markers, chosen, first)
    object.__setattr__(scale, "search", _search_quality(sc, markers, alts, rt, sz))
    return scale


#: Relative margin of the chosen marker set's alignment score over the runner-up's at which
#: the choice counts as clear-cut (score 1) [-]; half of it gives score 0.5 (common practice,
#: no source; measured on the generator's petrols, where the markers are right: margins
#: 0.2-0.6, see DEVELOPERS.md).
CLEAR_MARGIN = 0.10


def _search_quality(score: float, markers: dict[int, float], alts: list, rt: np.ndarray,
                    size: np.ndarray) -> dict[str, Any]:
    """How sure the marker search is: margin over the runner-up, marker peak sizes."""
    runner = alts[0] if alts else None
    if runner is None or not np.isfinite(score) or score <= 0:
        margin = 1.0 if runner is None and np.isfinite(score) and score > 0 else 0.0
    else:
        margin = (score - runner[0]) / abs(score)
    total = max(float(np.sum(size)), 1e-300)
    shares = [float(size[np.argmin(np.abs(rt - t))]) / total for t in markers.values()]
    return {
        "score": float(np.clip(margin / CLEAR_MARGIN, 0.0, 1.0)),
        "margin": round(float(margin), 4),
        "alignment_score": round(float(score), 3),
        "runner_up": None if runner is None else {
            "alignment_score": round(float(runner[0]), 3),
            "markers": {int(c): round(float(t), 4) for c, t in sorted(runner[1].items())}},
        "small_markers": bool(np.median(shares) < 0.001) if shares else True,
    }


def _search_one(s: Mapping[str, Any], rt: np.ndarray, sz: np.ndarray, first: float,
                top: np.ndarray, t_top: np.ndarray, w_top: np.ndarray, w_all: np.ndarray,
                cand_top: np.ndarray, look: _Lookup, lib: np.ndarray, bonus, tolerance: float,
                carbons: list[int], n_final: int, quick: bool = False,
                s_cache: dict | None = None, alts_out: list | None = None
                ) -> tuple[float, dict[int, float] | None]:
    """Steps 1-3 of :func:`find_markers` under one hold setting: (full score, markers).

    ``quick``: the best two core chains only, without variants or extension (to compare
    hold hypotheses).
    """
    iso = float(s.get("isothermal_until_min", 0.0) or 0.0)
    tm_set = float(s.get("holdup_time_min", 0.0) or 0.0)
    # a marker set's score depends on the setting through the hold and hold-up time only
    # (make_scale): the full search of the chosen hold reuses its quick comparison's scores
    cache: dict[tuple, float] = {} if s_cache is None else s_cache.setdefault(
        ("full", iso, tm_set), {})

    def full(m: Mapping[int, float], part: tuple[float, float] | None = None) -> float:
        key = (tuple(sorted(m.items())), part)
        if key in cache:
            return cache[key]
        sel = slice(None) if part is None else (t_top >= part[0]) & (t_top <= part[1])
        try:
            scale = make_scale(m, s, first)
            sc = align_indices(scale.index(t_top[sel]), lib, tolerance, weight=w_top[sel],
                               lib_bonus=bonus, score_only=True)[1]
        except SettingsError:
            sc = -np.inf
        cache[key] = sc
        return sc

    tm = tm_set if tm_set > 0 else first * 0.999
    if quick:
        n_final = 2
    chains = _chain_dp(t_top, cand_top, w_all[top], look, carbons, iso, tm, n_final,
                       geometric_check=tm_set > 0, s_cache=s_cache)
    if iso > 0 and tm_set <= 0 and chains:
        tm2 = estimate_holdup(chains[0], iso, first)
        if abs(tm2 - tm) > 1e-3 * tm:
            chains = _chain_dp(t_top, cand_top, w_all[top], look, carbons, iso, tm2, n_final,
                               s_cache=s_cache)
    if not chains:
        return -np.inf, None
    best_sc, best = -np.inf, None
    for rank, ch in enumerate(chains):
        keys = sorted(ch)
        variants = [keys]
        if len(keys) > 3 and not quick and rank < VARIANT_CHAINS:
            variants += [keys[1:], keys[:-1]]
        for sub in variants:
            m = {c: ch[c] for c in sub}
            sc = full(m)
            if sc > best_sc:
                best_sc, best = sc, m
    if best is None:
        return -np.inf, None
    if quick:
        return best_sc, best
    markers = _extend_chain(best, best_sc, rt, sz, full, s, first, (carbons[0], carbons[-1]))
    final = full(markers)
    # the alternatives a wrong choice would most likely be: the same peaks labelled one or two
    # carbon numbers off (a homologous shift: n-butane taken for C3), and the best other chain
    alts: list[tuple[float, dict[int, float]]] = []
    for k in (-2, -1, 1, 2):
        shifted = {c + k: t for c, t in markers.items()}
        if min(shifted) >= max(1, carbons[0] - 1) and max(shifted) <= carbons[-1] + 1:
            alts.append((full(shifted), shifted))
    for ch in chains:
        if set(ch.values()) != set(v for c, v in best.items() if c in ch) or set(ch) != set(best):
            if not (set(ch.items()) <= set(markers.items())):
                alts.append((full(ch), dict(ch)))
    # only sets that contradict the choice (a carbon number at another peak, a peak under
    # another carbon number); one more or one less end marker is the same scale
    by_t = {round(t, 9): c for c, t in markers.items()}
    alts = [(a, m) for a, m in alts if np.isfinite(a) and (
        any(c in markers and abs(markers[c] - t) > 1e-9 for c, t in m.items())
        or any(by_t.get(round(t, 9), c) != c for c, t in m.items()))]
    alts.sort(key=lambda x: -x[0])
    if alts and alts[0][0] > final and len(alts[0][1]) == len(markers):
        # a shifted labelling fits better: take it, the chosen set becomes the alternative
        final, markers, alts[0] = alts[0][0], alts[0][1], (final, markers)
    if alts_out is not None:
        alts_out.extend(alts)
    return final, markers


def _bracket_scores(rt: np.ndarray, tc: np.ndarray, jj: np.ndarray, ii: np.ndarray,
                    w_all: np.ndarray, look: _Lookup, carbons: list[int], iso: float,
                    tm: float) -> np.ndarray:
    """Scores (labels, pairs) of brackets (tc[jj], tc[ii]) (see :func:`find_markers`, step 1)."""
    n_lab = len(carbons)
    out = np.full((n_lab, len(jj)), -np.inf)
    if len(jj) == 0:
        return out
    lo = np.searchsorted(rt, tc[jj], side="right")
    hi = np.searchsorted(rt, tc[ii], side="left")
    cnt = np.maximum(hi - lo, 0)
    pair_of = np.repeat(np.arange(len(jj)), cnt)
    members = lo[pair_of] + (np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt))
    t_in = rt[members]
    t_a, t_b = tc[jj][pair_of], tc[ii][pair_of]
    frac = (t_in - t_a) / (t_b - t_a)
    if iso > 0 and tm > 0:
        with np.errstate(invalid="ignore", divide="ignore"):
            fl = np.log((t_in - tm) / (t_a - tm)) / np.log((t_b - tm) / (t_a - tm))
        frac = np.where((t_b <= iso) & np.isfinite(fl), fl, frac)
    w_in = w_all[members]
    for li, n in enumerate(carbons[:-1]):
        g, near, base = look.at(100.0 * (n + frac))
        out[li] = _grouped_score(pair_of, near, w_in * g, w_in * base, len(jj))
    return out


def _chain_triples(tc: np.ndarray, s_cache: dict | None, key: tuple
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Candidate triples (h, a, b), h < a < b, whose spacing ratio passes the loosest rule.

    ``q = ln((t_b - t_a) / (t_a - t_h))`` within ``[ln 0.6, ln 4]``; ordered by (a, b, h),
    so the steps into one pair (a, b) are contiguous and in increasing h. They depend on the
    candidates only, not on the hold, and are kept in ``s_cache`` between hypotheses.
    """
    if s_cache is not None and key in s_cache:
        return s_cache[key]
    D = tc[None, :] - tc[:, None]                               # D[a, b] = t_b - t_a
    with np.errstate(divide="ignore", invalid="ignore"):
        lnD = np.where(D > 0, np.log(np.where(D > 0, D, 1.0)), np.nan)
    fin = np.isfinite(lnD)
    a, b, h = np.nonzero(fin[:, :, None] & fin.T[:, None, :])     # [a, b, h]: t_h < t_a < t_b
    q = lnD[a, b] - lnD[h, a]
    keep = (q >= np.log(0.6)) & (q <= np.log(4.0))
    out = (h[keep], a[keep], b[keep], q[keep])
    if s_cache is not None:
        s_cache[key] = out
    return out


def _chain_dp(rt: np.ndarray, cand: np.ndarray, w_all: np.ndarray, look: _Lookup,
              carbons: list[int], iso: float, tm: float, n_final: int,
              rise: float = 0.08, hold_dev: float = 0.05, prog_range=(0.7, 1.02),
              prog_drop: float = 0.1, settled=(-0.03, 0.05), after_hold_max: float = 1.1,
              geometric_check: bool = False, beta_range=(1.5, 4.0),
              smooth_weight: float = 20.0, s_cache: dict | None = None
              ) -> list[dict[int, float]]:
    """The best labelled n-alkane chains among the candidate peaks (see :func:`find_markers`).

    The programme's tables depend on the hold setting only, not on ``n_final``: with
    ``s_cache`` they are kept, so the full search of the chosen hold reuses those of its quick
    comparison.
    """
    k = len(cand)
    n_lab = len(carbons)
    if k < 3 or n_lab < 3:
        return []
    tc = rt[cand]
    rules = (rise, hold_dev, prog_range, prog_drop, settled, after_hold_max, geometric_check,
             beta_range, smooth_weight)
    key = (cand.tobytes(), len(rt))
    dp_key = ("dp", key, iso, tm, rules)
    if s_cache is not None and dp_key in s_cache:
        V, B, L = s_cache[dp_key]
    else:
        V, B, L = _chain_tables(rt, tc, w_all[cand], w_all, look, carbons, iso, tm, key,
                                rules, s_cache)
        if s_cache is not None:
            s_cache[dp_key] = (V, B, L)
    # the best distinct chains of at least three markers
    flat = np.argsort(-np.where(L >= 3, V, -np.inf), axis=None)
    chains: list[dict[int, float]] = []
    taken: list[set] = []
    for f in flat[: 50 * n_final]:
        li, a, b = np.unravel_index(int(f), V.shape)
        if not np.isfinite(V[li, a, b]) or L[li, a, b] < 3:
            break
        pairs = {(carbons[li], int(b))}
        while li >= 1:
            pairs.add((carbons[li - 1], int(a)))
            h = int(B[li, a, b])
            if h < 0:
                break
            li, a, b = li - 1, h, a
        if any(pairs <= t for t in taken):
            continue
        taken.append(pairs)
        chains.append({c: float(tc[p]) for c, p in sorted(pairs)})
        if len(chains) >= n_final:
            break
    return chains


def _chain_tables(rt: np.ndarray, tc: np.ndarray, w_cand: np.ndarray, w_all: np.ndarray,
                  look: _Lookup, carbons: list[int], iso: float, tm: float, key: tuple,
                  rules: tuple, s_cache: dict | None
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The dynamic programme of :func:`_chain_dp`: best value V, back-pointer B, length L.

    ``V[li, a, b]``: best chain ending with candidates a, b as n-alkanes ``carbons[li - 1]``,
    ``carbons[li]``. Only the triples that pass the spacing rules of the hold are visited (a
    few thousand of the k^3); the best predecessor of each pair is the first (smallest h) of
    the highest, as a dense argmax over h would pick.
    """
    (rise, hold_dev, prog_range, prog_drop, settled, after_hold_max, geometric_check,
     beta_range, smooth_weight) = rules
    k = len(tc)
    n_lab = len(carbons)
    # bracket scores S[li, a, b]: peaks strictly between candidates a < b indexed as (n, n+1);
    # the linear ones do not depend on the hold and are kept in s_cache between calls
    if s_cache is not None and key in s_cache:
        S = s_cache[key].copy()
        if iso > 0 and tm > 0:
            jj, ii = np.triu_indices(k, 1)
            hold = tc[ii] <= iso
            jj, ii = jj[hold], ii[hold]
            S[:, jj, ii] = _bracket_scores(rt, tc, jj, ii, w_all, look, carbons, iso, tm)
    else:
        jj, ii = np.triu_indices(k, 1)
        S = np.full((n_lab, k, k), -np.inf)
        S[:, jj, ii] = _bracket_scores(rt, tc, jj, ii, w_all, look, carbons, 0.0, 0.0)
        if s_cache is not None:
            s_cache[key] = S.copy()
        if iso > 0 and tm > 0:
            hold = tc[ii] <= iso
            S[:, jj[hold], ii[hold]] = _bracket_scores(rt, tc, jj[hold], ii[hold], w_all, look,
                                                       carbons, iso, tm)
    own = 0.5 * w_cand
    h, a, b, q = _chain_triples(tc, s_cache, ("triples",) + key)
    th, ta, tb = tc[h], tc[a], tc[b]
    with np.errstate(divide="ignore", invalid="ignore"):
        if iso > 0:
            in_hold = tb <= iso
            programmed = th >= iso
            ok = ~in_hold | (q >= np.log(1.3))
            ok &= ~programmed | ((q >= np.log(prog_range[0])) & (q <= np.log(prog_range[1])))
            # the middle alkane after the hold: the next spacing is programmed, not longer
            ok &= ~(ta >= iso) | (q <= np.log(after_hold_max))
            tm_known = geometric_check and tm > 0
            if tm_known:
                # in the hold t'_(n+1) / t'_n = spacing ratio (both the same constant)
                qt = np.log((tc[None, :] - tm) / (tc[:, None] - tm))      # qt[a, b]
                ok &= ~in_hold | (np.abs(q - qt[a, b]) <= hold_dev)
                # ratio of adjusted times per CH2 in the hold between 1.5 and 4 (from memory:
                # about 2.5-3 for n-alkanes on methylsilicone near 35 degC)
                pair_hold = (tc[None, :] <= iso) & (tc[:, None] > tm)
                beta = (tc[None, :] - tm) / (tc[:, None] - tm)
                pair_ok = ~pair_hold | ((beta >= beta_range[0]) & (beta <= beta_range[1]))
                ok &= pair_ok[a, b] & pair_ok[h, a]
        else:
            ok = np.ones(len(q), dtype=bool)
            in_hold = np.zeros(len(q), dtype=bool)
            programmed = in_hold
    h, a, b, q, in_hold, programmed = (x[ok] for x in (h, a, b, q, in_hold, programmed))
    V = np.full((n_lab, k, k), -np.inf)        # V[li, a, b]: b is n-alkane carbons[li]
    R = np.full((n_lab, k, k), np.nan)         # q of the last step of the best path
    B = np.full((n_lab, k, k), -1, dtype=int)
    L = np.zeros((n_lab, k, k), dtype=int)
    upper = np.triu(np.ones((k, k), dtype=bool), 1)
    for li in range(1, n_lab):
        start = np.where(upper, own[:, None] + own[None, :] + S[li - 1], -np.inf)
        V[li], L[li] = start, np.where(upper, 2, 0)
        if li < 2 or carbons[li] != carbons[li - 1] + 1 or carbons[li - 1] != carbons[li - 2] + 1:
            continue
        prev_v = V[li - 1][h, a]
        live = np.isfinite(prev_v)
        prev_v, prev_q = prev_v[live], R[li - 1][h[live], a[live]]
        q_l, hold_l, prog_l = q[live], in_hold[live], programmed[live]
        with np.errstate(invalid="ignore"):
            has_q = np.isfinite(prev_q)
            dq = q_l - prev_q
            allowed = ~has_q | (dq <= rise)
            if iso > 0:
                allowed &= ~(has_q & hold_l) | (np.abs(dq) <= hold_dev)
                allowed &= ~(has_q & prog_l & (prev_q < 0)) | (dq >= -prog_drop)
            else:
                allowed &= ~(has_q & (prev_q < 0)) | (dq >= -prog_drop)
            settled_ok = (dq >= settled[0]) & (dq <= settled[1])
            allowed &= ~(has_q & (prev_q < 0)) | settled_ok
            pen = np.where(has_q & ~hold_l & (prev_q < 0.3), smooth_weight * dq * dq, 0.0)
        use = np.flatnonzero(live)[allowed]
        if len(use) == 0:
            continue
        tot = (prev_v - pen)[allowed]
        pair = a[use] * k + b[use]
        new = np.ones(len(use), dtype=bool)
        new[1:] = pair[1:] != pair[:-1]
        starts = np.flatnonzero(new)
        grp = np.cumsum(new) - 1
        best = np.maximum.reduceat(tot, starts)
        at_best = np.flatnonzero(tot == best[grp])
        first = np.ones(len(at_best), dtype=bool)
        first[1:] = grp[at_best[1:]] != grp[at_best[:-1]]
        pick = use[at_best[first]]                  # the first h of each pair's best
        pa, pb, ph = a[pick], b[pick], h[pick]
        val = best + S[li - 1][pa, pb] + own[pb]
        better = val > V[li][pa, pb]
        pa, pb, ph = pa[better], pb[better], ph[better]
        V[li][pa, pb] = val[better]
        R[li][pa, pb] = q[pick[better]]
        B[li][pa, pb] = ph
        L[li][pa, pb] = L[li - 1][ph, pa] + 1
    return V, B, L


def _extend_chain(markers: dict[int, float], score: float, rt: np.ndarray, size: np.ndarray,
                  full, s: Mapping[str, Any], first: float, carbon_range: tuple[int, int],
                  n_try: int = 4, rise: float = 0.08, hold_dev: float = 0.05,
                  prog_range=(0.7, 1.02), prog_drop: float = 0.1,
                  settled=(-0.03, 0.05), min_gain: float = -0.5,
                  min_size: float = 0.1) -> dict[int, float]:
    """Grow a marker chain one n-alkane at a time at either end (see :func:`find_markers`).

    The next n-alkane must keep the spacing rules of :func:`_chain_dp` with the chain's end
    spacings; of the peaks in that time window the ``n_try`` largest are tried, and the one
    with the best full alignment score is kept when it raises the score.
    """
    m = dict(markers)
    iso = float(s.get("isothermal_until_min", 0.0) or 0.0)
    lo_all, hi_all = np.log(0.6), np.log(4.0)
    for side in (1, -1):
        while len(m) >= 3:
            keys = sorted(m)
            t = [m[c] for c in keys]
            nxt = keys[-1] + 1 if side > 0 else keys[0] - 1
            if not carbon_range[0] <= nxt <= carbon_range[1]:
                break
            if side > 0:
                d = t[-1] - t[-2]
                q0 = np.log(d / (t[-2] - t[-3]))
                lo, hi = max(lo_all, q0 - (prog_drop if q0 < 0 else 2.0)), min(hi_all, q0 + rise)
                if (iso > 0 and t[-2] >= iso) or (iso <= 0 and q0 < 0):
                    lo, hi = max(lo, np.log(prog_range[0])), min(hi, np.log(prog_range[1]))
                if q0 < 0:
                    lo, hi = max(lo, q0 + settled[0]), min(hi, q0 + settled[1])
                if iso > 0 and t[-1] >= iso:
                    hi = min(hi, np.log(1.1))
                if iso > 0 and t[-1] + d * np.exp(hi) <= iso:
                    lo, hi = max(lo, q0 - hold_dev), min(hi, q0 + hold_dev)
                t_lo, t_hi = t[-1] + d * np.exp(lo), t[-1] + d * np.exp(hi)
            else:
                d = t[1] - t[0]
                q0 = np.log((t[2] - t[1]) / d)          # q of the new first step: q'
                lo, hi = max(lo_all, q0 - rise), min(hi_all, q0 + 2.0)
                if hi < 0:
                    hi = min(hi, q0 + prog_drop)
                if iso > 0 and t[1] <= iso:
                    lo, hi = max(lo, q0 - hold_dev), min(hi, q0 + hold_dev)
                if lo > hi:
                    break
                t_lo, t_hi = t[0] - d / np.exp(lo), t[0] - d / np.exp(hi)
            if lo > hi:
                break
            cand = np.flatnonzero((rt >= t_lo) & (rt <= t_hi))
            if len(cand) == 0:
                break
            edge_size = size[np.argmin(np.abs(rt - (t[-1] if side > 0 else t[0])))]
            cand = cand[size[cand] >= min_size * edge_size]
            cand = cand[np.argsort(-size[cand], kind="stable")[:n_try]]
            best_t, best_gain = None, min_gain
            for p in cand:
                # judged on the peaks up to (down to) the new marker: beyond it both
                # hypotheses only extrapolate
                part = (-np.inf, float(rt[p])) if side > 0 else (float(rt[p]), np.inf)
                gain = full({**m, nxt: float(rt[p])}, part) - full(m, part)
                if gain > best_gain:
                    best_gain, best_t = gain, float(rt[p])
            if best_t is None:
                break
            m[nxt] = best_t
    return m


# --------------------------------------------------------------------------------------------
# The lab's own index table, learnt from named reference runs
# --------------------------------------------------------------------------------------------

def _run_key(text: str) -> str:
    import re
    key = re.sub(r"[^A-Za-z0-9._-]+", "-", str(text)).strip("-")
    return key or "run"


def learn_indices(runs: Sequence[tuple[str, pd.DataFrame]], library: Any,
                  settings: Mapping[str, Any] | None = None, *,
                  recalibrate: bool = False) -> pd.DataFrame:
    """Retention indices of the named peaks of reference runs, averaged over the runs.

    Parameters
    ----------
    runs : sequence of (run id, peak table)
        Named reference runs of the lab's column (DEVELOPERS.md "Peak table").
    library : dha.library.Library
        For the names (and the n-alkanes that serve as markers).
    settings : dict, optional
        Full settings or the ``[identify]`` section (isothermal hold, hold-up time, markers).

    Returns
    -------
    DataFrame
        One row per component named in at least one run: ``name``, ``retention_index`` (mean),
        ``retention_index_sd`` (sample standard deviation over runs, NaN for one run),
        ``n_runs``, ``runs`` (";"-joined ids), ``retention_index_source`` (``learnt:<ids>``),
        ``index_kind`` ("learnt"); with ``recalibrate`` also the components the runs did not
        contain whose structural neighbours were learnt (:func:`recalibrate_neighbours`,
        ``index_kind`` "recalibrated"). Components in neither keep the shipped estimate.
        Several runs (different fuels) merge: each component's mean over the runs that hold
        it, with their spread (sd).

    Notes
    -----
    Each run's indices are computed from its own n-alkanes (named in the export, or given as
    ``identify.markers``) with the forms of :class:`IndexScale`; only peaks matched by name or
    CAS number count (not the shares of a co-elution split). A component named twice in one run
    counts once (its larger peak, see :func:`dha.identify.identify`).
    """
    from dha.errors import InputError
    from dha.identify import identify

    if not runs:
        raise InputError("index learn: no reference runs given")
    rows = []
    ids = []
    for run_id, peaks in runs:
        out = identify(peaks, library, settings)
        if len(out.attrs.get("markers", {})) < 2 or any(
                w.startswith("n-alkane markers found automatically")
                for w in out.attrs.get("warnings", [])):
            raise InputError(f"{run_id}: fewer than two n-alkanes named in the run; name them "
                             "in the export or give identify.markers, then learn again")
        named = out[out["match"].isin(["name", "cas"]) & out["retention_index"].notna()]
        named = named.drop_duplicates("row", keep="first")   # not the partner of a split
        named = named.drop_duplicates("component")
        ids.append(_run_key(run_id))
        rows.append(pd.DataFrame({"name": named["component"].to_numpy(),
                                  "ri": named["retention_index"].to_numpy(dtype=float),
                                  "run": ids[-1]}))
    allrows = pd.concat(rows, ignore_index=True)
    source = "learnt:" + "+".join(dict.fromkeys(ids))
    g = allrows.groupby("name", sort=False)
    table = pd.DataFrame({
        "retention_index": g["ri"].mean().round(2),
        "retention_index_sd": g["ri"].std(ddof=1).round(3),
        "n_runs": g["ri"].size(),
        "runs": g["run"].agg(lambda r: ";".join(dict.fromkeys(r))),
    }).reset_index()
    table["retention_index_source"] = source
    table["index_kind"] = "learnt"
    if recalibrate:
        table = pd.concat([table, recalibrate_neighbours(table, library, ids)],
                          ignore_index=True)
    return table.sort_values("retention_index", kind="stable").reset_index(drop=True)


#: Neighbour rule of :func:`recalibrate_neighbours` (common practice, no source; validated
#: on simulated columns, tests/test_retention.py): neighbours are learnt components of the same
#: group within BP_WINDOW_C degC of boiling point; weight exp(-|dbp| / BP_SCALE_C), doubled for
#: the same carbon number; the weighted mean offset is shrunk by n / (n + SHRINK) towards 0.
BP_WINDOW_C = 30.0
BP_SCALE_C = 10.0
SHRINK = 2.0
MIN_NEIGHBOURS = 2


def recalibrate_neighbours(learnt: pd.DataFrame, library: Any, ids: Sequence[str]
                           ) -> pd.DataFrame:
    """Recalibrated indices of the components the reference runs did not contain.

    A lab column's indices differ from the shipped estimates in a way that follows structure
    (the estimate's error depends on the group and the boiling point), so a component's
    offset is predicted from the learnt offsets (learnt - shipped index) of its structural
    neighbours: same group, boiling point within :data:`BP_WINDOW_C`, weighted by
    ``exp(-|dbp| / BP_SCALE_C)`` and twice for the same carbon number; at least
    :data:`MIN_NEIGHBOURS`; the weighted mean is shrunk by ``n / (n + SHRINK)`` (few
    neighbours, little trust). Components without such neighbours keep their estimate.

    Returns
    -------
    DataFrame
        Rows like :func:`learn_indices` with ``index_kind`` "recalibrated",
        ``retention_index_source`` ``recalibrated:<ids>``, ``n_runs`` 0 and
        ``retention_index_sd`` the weighted spread of the neighbours' offsets.
    """
    comps = library.components
    est = pd.to_numeric(comps["retention_index"], errors="coerce")
    bp = pd.to_numeric(comps.get("boiling_point_c"), errors="coerce")
    cn = pd.to_numeric(comps.get("carbon_number"), errors="coerce")
    grp = comps["group"]
    known = learnt[learnt["name"].isin(comps.index)]
    off = pd.Series(known["retention_index"].to_numpy(dtype=float)
                    - est.reindex(known["name"]).to_numpy(dtype=float),
                    index=known["name"].to_numpy()).dropna()
    rows = []
    done = set(known["name"])
    for name in comps.index:
        if name in done or not np.isfinite(est[name]) or not np.isfinite(bp[name]):
            continue
        if grp[name] == "n_paraffins":
            continue                   # the n-alkanes define the scale: 100 n by definition
        nb = [n for n in off.index if grp[n] == grp[name] and np.isfinite(bp[n])
              and abs(bp[n] - bp[name]) <= BP_WINDOW_C]
        if len(nb) < MIN_NEIGHBOURS:
            continue
        w = np.array([np.exp(-abs(bp[n] - bp[name]) / BP_SCALE_C)
                      * (2.0 if cn[n] == cn[name] else 1.0) for n in nb])
        o = off[nb].to_numpy(dtype=float)
        mean = float(np.sum(w * o) / np.sum(w))
        spread = float(np.sqrt(np.sum(w * (o - mean) ** 2) / np.sum(w)))
        shift = mean * len(nb) / (len(nb) + SHRINK)
        rows.append({"name": name, "retention_index": round(float(est[name]) + shift, 2),
                     "retention_index_sd": round(spread, 3), "n_runs": 0,
                     "runs": ";".join(dict.fromkeys(ids)),
                     "retention_index_source": "recalibrated:" + "+".join(dict.fromkeys(ids)),
                     "index_kind": "recalibrated"})
    return pd.DataFrame(rows, columns=["name", "retention_index", "retention_index_sd",
                                       "n_runs", "runs", "retention_index_source",
                                       "index_kind"])


def write_index_overlay(table: pd.DataFrame, out_dir: str | Path, *, runs: Sequence[str] = (),
                        overwrite: bool = False) -> Path:
    """Write a learnt index table as a library overlay folder.

    Files: ``components.csv`` (``name, retention_index, retention_index_source``; the other
    columns blank, so the shipped values stay), ``references.toml`` (the ``learnt:...`` key
    describing the runs), ``library.toml`` (overlay name and version) and
    ``learnt_indices.csv`` (mean, sd and number of runs per component; for people, the loader
    ignores it). Use the folder with ``--library DIR``.
    """
    import datetime
    import json

    from dha import __version__
    from dha.errors import InputError

    out = Path(out_dir)
    files = ["components.csv", "references.toml", "library.toml", "learnt_indices.csv"]
    if out.exists() and not overwrite and any((out / f).exists() for f in files):
        raise InputError(f"{out}: holds a library overlay already; use --overwrite to replace it")
    out.mkdir(parents=True, exist_ok=True)
    learnt_src = [x for x in table["retention_index_source"] if str(x).startswith("learnt")]
    source = str(learnt_src[0]) if learnt_src else "learnt:none"
    table[["name", "retention_index", "retention_index_source"]].to_csv(
        out / "components.csv", index=False, float_format="%.2f")
    table.to_csv(out / "learnt_indices.csv", index=False)
    today = datetime.date.today()
    cite = ("Retention indices learnt by dha index learn from the named reference run(s) "
            + ", ".join(runs or [source.split(":", 1)[1]])
            + f" on the lab column ({len(table)} components; mean over runs, "
            "see learnt_indices.csv for n and sd)")
    ref = (f"[{json.dumps(source)}]\n"
           f"cite = {json.dumps(cite)}\n"
           f"package = \"dha\"\nversion = {json.dumps(__version__)}\n"
           f"method = \"dha index learn (van den Dool-Kratz / Kovats index from the run's n-alkanes)\"\n"
           f"licence = \"lab data; the lab's own terms\"\n")
    n_re = int((table.get("index_kind", pd.Series(dtype=object)) == "recalibrated").sum())
    re_sources = [x for x in dict.fromkeys(table["retention_index_source"])
                  if str(x).startswith("recalibrated:")]
    for key in re_sources:
        ref += (f"\n[{json.dumps(key)}]\n"
                f"cite = {json.dumps(f'Shipped estimates recalibrated by dha index learn from the learnt offsets of structural neighbours (same group, boiling point within {BP_WINDOW_C:g} degC) in the run(s) ' + key.split(':', 1)[1] + f' ({n_re} components; see learnt_indices.csv)')}\n"
                f"package = \"dha\"\nversion = {json.dumps(__version__)}\n"
                f"method = \"dha.retention.recalibrate_neighbours\"\n"
                f"licence = \"lab data; the lab's own terms\"\n")
    (out / "references.toml").write_text(ref, encoding="utf-8")
    (out / "library.toml").write_text(
        f"name = \"lab-learnt-indices\"\nversion = \"{today.year}.{today.month:02d}.1\"\n"
        f"description = {json.dumps('Lab retention indices learnt from ' + source)}\n",
        encoding="utf-8")
    return out
