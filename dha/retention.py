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
819, p. 844), ``/work/shared/data/facts.md`` fact 7.

The hold-up time ``t_M``: the setting ``identify.holdup_time_min`` when > 0, else estimated from
three consecutive isothermal n-alkanes, whose adjusted times form a geometric series:
``t_M = (t_n t_{n+2} - t_{n+1}^2) / (t_n + t_{n+2} - 2 t_{n+1})`` (follows from
``t'_{n+1}^2 = t'_n t'_{n+2}``), else the first peak's time.
"""
from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any, Mapping

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
    """

    carbon: np.ndarray
    rt_min: np.ndarray
    isothermal_until_min: float = 0.0
    holdup_time_min: float = 0.0

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
        """{carbon number: rt [min]}."""
        return {int(c): float(t) for c, t in zip(self.carbon, self.rt_min)}

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


def make_scale(markers: Mapping[int, float], settings: Mapping[str, Any] | None = None,
               first_peak_min: float | None = None) -> IndexScale:
    """An :class:`IndexScale` from markers and the ``[identify]`` settings section."""
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
    return IndexScale(carbon, rt, iso, tm)


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

def candidate_chains(rt_min: np.ndarray, size: np.ndarray, *, n_candidates: int = 45,
                     min_length: int = 4, max_ratio: float = 4.0,
                     n_best: int = 12) -> list[list[int]]:
    """Chains of tall peaks with monotone, smoothly varying spacing (n-alkane candidates).

    The ``n_candidates`` tallest peaks are taken in time order. A chain a_1 < a_2 < ... is
    scored by a dynamic programme over pairs (previous, current): each member earns its size
    rank score ``log(size / median size)``; each step pays ``2 (ln r)^2`` where
    ``r = (t_{k+1} - t_k) / (t_k - t_{k-1})`` is the ratio of consecutive spacings, and steps
    with ``r`` outside [1/max_ratio, max_ratio] are forbidden. n-Alkane spacings grow by a
    constant factor in an isothermal hold and stay nearly constant under a temperature
    programme, so the true series has small, slowly changing ``ln r`` (common practice, no
    source).

    Returns
    -------
    list of list of int
        Up to ``n_best`` chains (positions into ``rt_min``) of at least ``min_length`` peaks,
        best first, plus their prefixes/suffixes are not repeated.
    """
    n = len(rt_min)
    if n < min_length:
        return []
    order = np.argsort(-size, kind="stable")[: min(n_candidates, n)]
    cand = np.sort(order)
    t = rt_min[cand]
    s = size[cand]
    med = np.median(s[s > 0]) if np.any(s > 0) else 1.0
    gain = np.log(np.maximum(s, 1e-12) / med) + 1.0
    k = len(cand)
    # best[j, i]: best score of a chain ending with (..., j, i), j < i
    neg = -1e18
    best = np.full((k, k), neg)
    back = np.full((k, k), -1, dtype=int)
    length = np.zeros((k, k), dtype=int)
    dt = t[None, :] - t[:, None]                    # dt[j, i] = t_i - t_j
    valid_pair = dt > 0
    best[valid_pair] = (gain[:, None] + gain[None, :])[valid_pair]
    length[valid_pair] = 2
    for i in range(k):
        for j in range(i):
            if not valid_pair[j, i]:
                continue
            # predecessor h < j: ratio r = (t_i - t_j) / (t_j - t_h)
            prev = best[:j, j]
            if prev.size == 0:
                continue
            r = dt[j, i] / dt[:j, j]
            ok = (r >= 1.0 / max_ratio) & (r <= max_ratio) & (prev > neg / 2)
            if not np.any(ok):
                continue
            sc = np.where(ok, prev - 2.0 * np.log(np.where(ok, r, 1.0)) ** 2, neg)
            h = int(np.argmax(sc))
            cand_score = sc[h] + gain[i]
            if cand_score > best[j, i]:
                best[j, i] = cand_score
                back[j, i] = h
                length[j, i] = length[h, j] + 1
    chains: list[list[int]] = []
    seen: set[tuple[int, ...]] = set()
    flat = np.argsort(-best, axis=None)
    for f in flat:
        j, i = divmod(int(f), k)
        if best[j, i] <= neg / 2 or len(chains) >= n_best:
            break
        if length[j, i] < min_length:
            continue
        chain = [i, j]
        a, b = j, i
        while back[a, b] >= 0:
            a, b = int(back[a, b]), a
            chain.append(a)
        chain = tuple(int(cand[c]) for c in reversed(chain))
        if any(set(chain) <= set(c) for c in seen):
            continue
        seen.add(chain)
        chains.append(list(chain))
    return chains


def align_indices(peak_index: np.ndarray, lib_index: np.ndarray, tolerance: float, *,
                  weight: np.ndarray | None = None, lo: np.ndarray | None = None,
                  hi: np.ndarray | None = None) -> tuple[np.ndarray, float]:
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

    Returns
    -------
    assign : ndarray of int, shape (P,)
        Library position of each peak, -1 if unmatched.
    score : float
        Total gain of the assignment.

    Notes
    -----
    Maximises ``sum w_p (1 - (d_pc / tol)^2)`` over non-crossing matchings with
    ``|d_pc| <= tol``, ``d_pc = I_p - I_c``. With Gaussian index errors of spread
    ``sigma`` and unknown peaks spread evenly, this gain is the log-likelihood ratio "peak is c"
    against "peak is unknown" scaled by ``2 sigma^2 / tol^2``, with the window edge as the point
    where both are equally likely. The dynamic programme is the longest-common-subsequence
    recurrence ``G[p, c] = max(G[p-1, c], G[p, c-1], G[p-1, c-1] + g_pc)``, computed one peak
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
    left = np.maximum(np.searchsorted(c_idx, p_idx - tolerance, side="left"), lo)
    right = np.minimum(np.searchsorted(c_idx, p_idx + tolerance, side="right"), hi)
    finite = np.isfinite(p_idx)
    g_rows = np.zeros((n_p + 1, n_c + 1))
    cols = np.arange(n_c)
    prev = g_rows[0]
    for p in range(n_p):
        row = prev.copy()
        if finite[p] and right[p] > left[p]:
            js = cols[left[p]:right[p]]
            d = (p_idx[p] - c_idx[js]) / tolerance
            gain = w[p] * (1.0 - d * d)
            cand = prev[js] + gain
            sub = row[js + 1]
            row[js + 1] = np.maximum(sub, cand)
            np.maximum.accumulate(row, out=row)
        g_rows[p + 1] = row
        prev = row
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


def find_markers(rt_min: np.ndarray, size: np.ndarray, lib_index: np.ndarray, tolerance: float,
                 settings: Mapping[str, Any] | None = None, *,
                 alkane_carbons: list[int] | None = None, n_score: int = 150
                 ) -> IndexScale | None:
    """Find the n-alkane markers of an unnamed run.

    Parameters
    ----------
    rt_min, size : ndarray
        Retention times [min] and areas (or heights) of all peaks, sorted by time.
    lib_index : ndarray
        The library's retention indices (any order) [-].
    tolerance : float
        Matching window half-width used to score a hypothesis [index units].
    settings : dict, optional
        The ``[identify]`` section (isothermal hold, hold-up time).
    alkane_carbons : list of int, optional
        Carbon numbers of the library's n-alkanes (default 3-13).
    n_score : int
        Number of largest peaks used to score a hypothesis.

    Returns
    -------
    IndexScale or None
        The best scale, or None when no chain of at least four candidate peaks exists.

    Notes
    -----
    Candidate chains come from :func:`candidate_chains` (tall peaks, smooth spacing); each
    chain, each sub-chain obtained by dropping one end member, and each carbon number of its
    first member gives a hypothesis. A hypothesis is scored by the order-preserving alignment
    (:func:`align_indices`) of the ``n_score`` largest peaks with the library, each peak
    weighted by ``log(1 + size / median size)``: the true marker set puts many large peaks close
    to library indices, a wrong one only by chance. The best-scoring hypothesis wins.
    """
    rt = np.asarray(rt_min, dtype=float)
    sz = np.asarray(size, dtype=float)
    carbons = sorted(alkane_carbons or range(3, 14))
    c_min, c_max = carbons[0], carbons[-1]
    lib = np.sort(np.asarray(lib_index, dtype=float)[np.isfinite(lib_index)])
    chains = candidate_chains(rt, sz)
    if not chains:
        return None
    top = np.sort(np.argsort(-sz, kind="stable")[: min(n_score, len(sz))])
    med = np.median(sz[top][sz[top] > 0]) if np.any(sz[top] > 0) else 1.0
    w = np.log1p(sz[top] / med)
    first = float(np.nanmin(rt)) if len(rt) else None
    best: tuple[float, IndexScale | None] = (-np.inf, None)
    tried: set[tuple] = set()
    for chain in chains:
        subs = [chain, chain[1:], chain[:-1]]
        for sub in subs:
            if len(sub) < 3:
                continue
            for c0 in range(c_min, c_max - len(sub) + 2):
                key = (tuple(sub), c0)
                if key in tried:
                    continue
                tried.add(key)
                markers = {c0 + k: float(rt[p]) for k, p in enumerate(sub)}
                try:
                    scale = make_scale(markers, settings, first)
                except SettingsError:
                    continue
                idx = scale.index(rt[top])
                _, score = align_indices(idx, lib, tolerance, weight=w)
                if score > best[0]:
                    best = (score, scale)
    return best[1]
