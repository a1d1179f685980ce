"""Synthetic runs: a composition -> a realistic peak table, with the truth kept apart.

Used by the tests, the demo and the benchmarks. Everything here is a model, not a measurement:

* Retention times. n-Alkane retention times come from a simple solvation model of a
  temperature-programmed run: the retention factor of n-C_n is
  ``ln k_n(T) = ln k_5(T_0) + (n - 5) ln(beta) + (h_0 + h_1 n)(1/T - 1/T_0)`` (a constant
  ``ln(beta)`` per CH2 group and a van 't Hoff temperature dependence), and the solute moves
  through the column at ``dz/dt = 1 / (t_M (1 + k(T(t))))``, integrated until it leaves. The
  parameters are chosen (invented, plausible) so that a 100 m column with t_M = 4 min and
  35 degC hold 15 min, then 2 degC/min elutes n-C5 near 8 min and n-C12 near 110 min. Other
  components are placed by their library retention index between the n-alkanes with the same
  forms :mod:`dha.retention` uses (logarithmic on adjusted times within the hold, linear after),
  so the library indices are the truth.
* Noise: Gaussian noise on each non-alkane index (``index_noise_sd``), a slow drift of all
  times (``drift_pct``: times grow by up to ``drift_pct`` % towards the end of the run,
  ``t (1 + d t / t_end)``, n-alkanes included), multiplicative area noise.
* Random draws that belong to one component (its column offset, its index noise, its weight in
  an example composition, the area noise and naming of the peak it heads) come from a generator
  seeded by the run's seed and a stable digest of the component's name (:func:`component_rng`),
  not from one stream shared in name order: adding a component to the library or to a
  composition leaves every other component's draws as they were.
* FID areas: mass / RRF with the theoretical relative response factors of :mod:`dha.quantify`
  (``RRF = M 0.7487 / (12.011 n_C)``, ECN for oxygenates).
* Known co-elution pairs of the library elute as one peak; trace components below
  ``missing_trace_below_pct`` are dropped; ``extra_unknowns`` small peaks of no library
  component are added.

The example petrol compositions (:func:`example_composition`) are invented for tests and the
demo: group and carbon-number profiles typical of the stream (common practice, no source),
spread over the library's components with fixed pseudo-random weights.
"""
from __future__ import annotations

import hashlib
from typing import Any, Mapping

import numpy as np
import pandas as pd

from dha.errors import InputError
from dha.retention import IndexScale

#: Default temperature programme (invented, typical of a petrol DHA run).
DEFAULT_PROGRAMME = {"initial_c": 35.0, "hold_min": 15.0, "rate_c_min": 2.0, "final_c": 250.0,
                     "holdup_min": 4.0}


def alkane_retention_times(programme: Mapping[str, float] | None = None,
                           carbons: range = range(1, 17)) -> dict[int, float]:
    """Retention times [min] of n-alkanes under a temperature programme (model, see module).

    >>> t = alkane_retention_times()
    >>> 6 < t[5] < 10 and t[5] < t[6] < t[7]
    True
    """
    p = {**DEFAULT_PROGRAMME, **(programme or {})}
    t0 = 308.15                                  # reference temperature [K]
    beta = 2.75                                  # factor per CH2 at T0 (invented, plausible)
    ln_k5 = np.log(0.75)
    n = np.array(list(carbons), dtype=float)
    h = 900.0 + 520.0 * n                        # van 't Hoff slope [K] (invented, plausible)
    ln_k0 = ln_k5 + (n - 5) * np.log(beta)
    tm = float(p["holdup_min"])
    dt = 0.01
    z = np.zeros_like(n)
    out = np.full_like(n, np.nan)
    t = 0.0
    t_end = p["hold_min"] + (p["final_c"] - p["initial_c"]) / p["rate_c_min"] + 200.0
    while t < t_end and np.isnan(out).any():
        temp_c = p["initial_c"] + max(0.0, t - p["hold_min"]) * p["rate_c_min"]
        temp = min(temp_c, p["final_c"]) + 273.15
        k = np.exp(ln_k0 + h * (1.0 / temp - 1.0 / t0))
        z += dt / (tm * (1.0 + k))
        t += dt
        done = (z >= 1.0) & np.isnan(out)
        # linear interpolation of the exit time inside the step
        if done.any():
            over = (z[done] - 1.0) / (dt / (tm * (1.0 + k[done])))
            out[done] = t - over * dt
    return {int(c): float(x) for c, x in zip(n, out) if np.isfinite(x)}


def _digest(text: str) -> int:
    """A stable 64-bit integer of a text (BLAKE2b; unlike ``hash()`` not salted per process)."""
    return int.from_bytes(hashlib.blake2b(text.encode("utf-8"), digest_size=8).digest(), "little")


def component_rng(seed: int, purpose: str, name: str) -> np.random.Generator:
    """The random generator of one component's draw for one purpose under one seed.

    Seeded by ``seed`` and stable digests of ``purpose`` and ``name``, so the draw depends on
    nothing else: not on which other components the library or the composition holds, nor on
    their order, nor on the Python process.

    >>> a = component_rng(3, "column", "toluene").normal()
    >>> a == component_rng(3, "column", "toluene").normal() != component_rng(4, "column", "toluene").normal()
    True
    """
    return np.random.default_rng([int(seed) % 2**63, _digest(purpose), _digest(str(name))])


def _width_min(rt_min):
    """Standard deviation of a peak at ``rt_min`` [min] (invented: 100 m column, petrol run)."""
    return 0.02 + 0.0015 * rt_min


def _rrf(names: list[str], library: Any) -> np.ndarray:
    from dha.quantify import library_rrf
    from dha.settings import default_settings
    return library_rrf(names, library, default_settings()).reindex(names).to_numpy(dtype=float)


def synthetic_run(composition: Mapping[str, float] | pd.DataFrame, library: Any, *,
                  seed: int = 0, index_noise_sd: float = 0.5, drift_pct: float = 0.0,
                  names: bool | float = False, missing_trace_below_pct: float = 0.0,
                  extra_unknowns: int = 0, programme: Mapping[str, float] | None = None,
                  area_noise_pct: float = 1.0, total_area: float = 1.0e6,
                  coelute: bool = True, merge_unresolved: bool = True,
                  column_sd: float = 0.0, column_seed: int = 0
                  ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """A synthetic peak table for a composition.

    Parameters
    ----------
    composition : dict or DataFrame
        Library name -> mass %, or a table with columns ``component`` and ``mass_pct``.
    library : dha.library.Library
        Source of indices, molar masses, carbon numbers, ECNs and co-elution pairs.
    seed : int
        Seed of the random draws (per component through :func:`component_rng`, the rest from
        one generator).
    index_noise_sd : float
        Standard deviation of the Gaussian noise on each non-alkane index [index units].
    drift_pct : float
        Slow drift of the retention times: ``t (1 + drift_pct/100 * t / t_end)`` [%].
    names : bool or float
        Write library names in the ``name`` column: all (True), none (False) or this
        fraction of the peaks, chosen at random.
    missing_trace_below_pct : float
        Components below this mass % give no peak [%].
    extra_unknowns : int
        Number of small peaks of no library component, at random indices.
    programme : dict, optional
        Temperature programme, keys of :data:`DEFAULT_PROGRAMME`.
    area_noise_pct : float
        Relative standard deviation of the areas [%].
    total_area : float
        Sum of the areas before noise [counts].
    coelute : bool
        Merge the library's known co-elution pairs into one peak.
    column_sd, column_seed : float, int
        A fixed deviation of the lab column's indices from the library's, drawn per
        component from N(0, column_sd) with its own seed (the same for every run of that
        column) [index units]; ``index_noise_sd`` then adds run-to-run noise. The offset of a
        component depends only on ``column_seed`` and its name (:func:`component_rng`).
    merge_unresolved : bool
        Merge components closer than twice the peak width (standard deviation
        ``0.02 + 0.0015 t`` min, invented) into one peak.

    Returns
    -------
    peaks : DataFrame
        Peak table (``row, rt_min, area, height, area_pct, name, cas, retention_index,
        cds_mass_pct``), sorted by ``rt_min``.
    truth : DataFrame
        One row per component of the composition and per extra unknown: ``component`` (None
        for an extra unknown), ``mass_pct``, ``row`` (peak row, <NA> if missing),
        ``true_index`` (the index after noise), ``rt_min``.
    """
    rng = np.random.default_rng(seed)
    if isinstance(composition, pd.DataFrame):
        comp = dict(zip(composition["component"], composition["mass_pct"]))
    else:
        comp = dict(composition)
    comps = library.components
    missing = [c for c in comp if c not in comps.index]
    if missing:
        raise InputError(f"synthetic run: not library names: {', '.join(missing[:5])}")
    names_list = [c for c, m in comp.items() if m > 0]
    mass = np.array([comp[c] for c in names_list], dtype=float)
    mass_pct = 100.0 * mass / mass.sum()
    lib_ri = pd.to_numeric(comps.loc[names_list, "retention_index"], errors="coerce").to_numpy(float)
    if np.isnan(lib_ri).any():
        bad = [c for c, r in zip(names_list, lib_ri) if np.isnan(r)]
        raise InputError(f"synthetic run: no retention index for {', '.join(bad[:5])}")
    is_alkane = (comps.loc[names_list, "group"] == "n_paraffins").to_numpy()
    noise = np.array([component_rng(seed, "index", c).normal(0.0, index_noise_sd)
                      for c in names_list], dtype=float)
    if column_sd > 0:
        noise = noise + np.array([component_rng(column_seed, "column", c).normal(0.0, column_sd)
                                  for c in names_list], dtype=float)
    true_ri = lib_ri + np.where(is_alkane, 0.0, noise)

    prog = {**DEFAULT_PROGRAMME, **(programme or {})}
    alk = alkane_retention_times(prog)
    scale = IndexScale(np.array(sorted(alk)), np.array([alk[c] for c in sorted(alk)]),
                       isothermal_until_min=float(prog["hold_min"]),
                       holdup_time_min=float(prog["holdup_min"]))
    rt = scale.rt(true_ri)
    t_end = max(rt.max(), 1e-9)
    rt = rt * (1.0 + drift_pct / 100.0 * rt / t_end)

    rrf = _rrf(names_list, library)
    area = mass_pct / rrf
    area = area / area.sum() * total_area
    present = mass_pct >= missing_trace_below_pct

    # peaks: one per present component; known co-elution pairs merged
    peak_of = np.arange(len(names_list))
    if coelute and getattr(library, "coelution", None) is not None:
        pos = {c: i for i, c in enumerate(names_list)}
        for r in library.coelution.itertuples(index=False):
            a, b = pos.get(r.name_a), pos.get(r.name_b)
            if a is not None and b is not None and present[a] and present[b]:
                big, small = (a, b) if area[a] >= area[b] else (b, a)
                peak_of[small] = peak_of[big]
    if merge_unresolved:
        # two Gaussian peaks of equal width sigma show a single maximum when their separation
        # is below 2 sigma (from memory; textbook property of a two-Gaussian sum): such
        # components elute as one peak
        idx = [i for i in np.argsort(rt, kind="stable") if present[i]]
        for a, b in zip(idx, idx[1:]):
            if rt[b] - rt[a] < 2.0 * _width_min(rt[b]):
                old_id, new_id = peak_of[b], peak_of[a]
                peak_of[peak_of == old_id] = new_id
    p_rt: dict[int, float] = {}
    p_area: dict[int, float] = {}
    for i in np.flatnonzero(present):
        k = peak_of[i]
        p_area[k] = p_area.get(k, 0.0) + area[i]
        p_rt[k] = p_rt.get(k, 0.0) + area[i] * rt[i]
    p_rt = {k: v / p_area[k] for k, v in p_rt.items()}         # apex near the area centre
    keys = sorted(p_rt)
    peaks = pd.DataFrame({"_key": keys, "rt_min": [p_rt[k] for k in keys],
                          "area": [p_area[k] for k in keys]})
    n_extra = int(extra_unknowns)
    if n_extra:
        lo, hi = np.nanmin(lib_ri), np.nanmax(lib_ri)
        x_ri = rng.uniform(lo, hi, n_extra)
        x_rt = scale.rt(x_ri)
        x_rt = x_rt * (1.0 + drift_pct / 100.0 * x_rt / t_end)
        x_area = total_area * rng.uniform(1e-5, 5e-4, n_extra)
        peaks = pd.concat([peaks, pd.DataFrame({"_key": -1 - np.arange(n_extra), "rt_min": x_rt,
                                                "area": x_area})], ignore_index=True)
    main: dict[int, int] = {}                     # a peak is named after its largest member
    for i in np.flatnonzero(present):
        k = peak_of[i]
        if k not in main or area[i] > area[main[k]]:
            main[k] = i
    # per-peak draws: a component's peak from its own generator, the extra unknowns from the run's
    head = [names_list[main[k]] if k >= 0 else None for k in peaks["_key"]]
    n_comp_peaks = sum(h is not None for h in head)
    z_extra = iter(rng.normal(0.0, 1.0, len(peaks) - n_comp_peaks))
    z_area = np.array([component_rng(seed, "area", h).normal() if h is not None else next(z_extra)
                       for h in head])
    peaks["area"] = peaks["area"] * np.exp(area_noise_pct / 100.0 * z_area)
    u_extra = iter(rng.random(len(peaks) - n_comp_peaks))
    u_name = np.array([component_rng(seed, "named", h).random() if h is not None else next(u_extra)
                       for h in head])
    order = np.argsort(peaks["rt_min"].to_numpy(), kind="stable")
    peaks = peaks.iloc[order].reset_index(drop=True)
    u_name = u_name[order]
    peaks["row"] = np.arange(1, len(peaks) + 1)
    width_min = _width_min(peaks["rt_min"])
    peaks["height"] = peaks["area"] / (width_min * 60.0 * np.sqrt(2 * np.pi))
    peaks["area_pct"] = 100.0 * peaks["area"] / peaks["area"].sum()
    row_of = dict(zip(peaks["_key"], peaks["row"]))
    label = [names_list[main[k]] if k >= 0 else None for k in peaks["_key"]]
    if names is True:
        show = np.ones(len(peaks), dtype=bool)
    elif names is False or names is None:
        show = np.zeros(len(peaks), dtype=bool)
    else:
        show = u_name < float(names)
    peaks["name"] = [lab if s else None for lab, s in zip(label, show)]
    peaks["cas"] = None
    peaks["retention_index"] = np.nan
    peaks["cds_mass_pct"] = np.nan
    peaks = peaks[["row", "rt_min", "area", "height", "area_pct", "name", "cas",
                   "retention_index", "cds_mass_pct"]]
    truth = pd.DataFrame({
        "component": names_list,
        "mass_pct": mass_pct,
        "row": pd.array([row_of[peak_of[i]] if present[i] else pd.NA
                         for i in range(len(names_list))], dtype="Int64"),
        "true_index": true_ri,
        "rt_min": rt,
    })
    if n_extra:
        truth = pd.concat([truth, pd.DataFrame({
            "component": [None] * n_extra, "mass_pct": np.nan,
            "row": pd.array([row_of[-1 - j] for j in range(n_extra)], dtype="Int64"),
            "true_index": x_ri, "rt_min": x_rt})], ignore_index=True)
    return peaks, truth


def identification_accuracy(identified: pd.DataFrame, truth: pd.DataFrame) -> float:
    """Mass fraction of the truth whose peak carries its component in the identified table [-].

    A component without a peak (a missing trace) counts as not identified. A peak that holds
    several components (a co-elution or an unresolved pair of the synthetic run) counts as
    correct for all of them when it is identified as any one of them: the run cannot tell
    them apart, so the peak-to-component assignment is right.
    """
    t = truth.dropna(subset=["component"])
    t = t[t["row"].notna()]
    got = set(zip(identified["row"].astype(int), identified["component"].astype(object)))
    members: dict[int, set] = {}
    for r, c in zip(t["row"].astype(int), t["component"]):
        members.setdefault(r, set()).add(c)
    ok = np.array([(r, c) in got or (len(members[r]) > 1 and any((r, m) in got for m in members[r]))
                   for r, c in zip(t["row"].astype(int), t["component"])], dtype=bool)
    total = truth["mass_pct"].sum()
    return float(t["mass_pct"].to_numpy()[ok].sum() / total) if total > 0 else float("nan")


def identification_ceiling(peaks: pd.DataFrame, truth: pd.DataFrame, library: Any) -> float:
    """Accuracy of an identifier told which components have a peak: a practical bound [-].

    The oracle knows the truth's set of components with a peak, which of them share a peak,
    and which peaks are extra unknowns -- everything except which peak is which. It orders
    the peaks' member groups by their library index (mean over a shared peak's members) and
    gives them to the peaks in retention-time order. With Gaussian index errors of one
    spread this order is the maximum-likelihood assignment (for a convex cost the sorted
    matching is optimal; rearrangement inequality), so an identifier that does not know the
    sample's composition beforehand cannot expect to beat it by much: where the library's
    entries lie closer than the index noise, neighbours swap places and no order-based
    method can tell. It is not a strict bound: it ignores peak sizes and treats a merged peak
    by its members' mean index, so an identifier given more (the lab's alkane standard and its
    oxygenates) can edge past it (reformate, sd 0.5, seeds 0-9: 0.993 against 0.989).
    Scored with :func:`identification_accuracy`.
    """
    t = truth.dropna(subset=["component"])
    t = t[t["row"].notna()]
    ri = pd.to_numeric(library.components["retention_index"], errors="coerce")
    groups: dict[int, list[str]] = {}
    for r, c in zip(t["row"].astype(int), t["component"]):
        groups.setdefault(r, []).append(c)
    order = sorted(groups.values(), key=lambda cs: (float(np.mean([ri[c] for c in cs])), cs[0]))
    real = peaks[peaks["row"].isin(list(groups))].sort_values("rt_min", kind="stable")
    label = dict(zip(real["row"].astype(int), (sorted(cs, key=lambda c: ri[c])[0] for cs in order)))
    out = pd.DataFrame({"row": peaks["row"].astype(int),
                        "component": [label.get(int(r)) for r in peaks["row"]]})
    return identification_accuracy(out, truth)


# --------------------------------------------------------------------------------------------
# Example compositions (invented)
# --------------------------------------------------------------------------------------------

#: Group totals [mass %] and carbon-number profiles (relative weights) of the three example
#: petrols; invented, shaped like common streams (common practice, no source).
_PROFILES: dict[str, dict[str, Any]] = {
    "reformate": {
        "groups": {"aromatics": 42.0, "isoparaffins": 27.0, "n_paraffins": 12.0,
                   "naphthenes": 6.0, "olefins": 11.0, "oxygenates": 2.0},
        "carbon": {"aromatics": {6: 2, 7: 30, 8: 35, 9: 25, 10: 8, 11: 2},
                   "isoparaffins": {4: 4, 5: 25, 6: 30, 7: 25, 8: 10, 9: 4, 10: 2},
                   "n_paraffins": {3: 1, 4: 10, 5: 25, 6: 25, 7: 20, 8: 10, 9: 5, 10: 3, 11: 1},
                   "naphthenes": {5: 15, 6: 40, 7: 30, 8: 15},
                   "olefins": {4: 20, 5: 35, 6: 30, 7: 15},
                   "oxygenates": {5: 1}},
        "fixed": {"benzene": 0.8},
    },
    "alkylate": {
        "groups": {"isoparaffins": 58.0, "aromatics": 20.0, "n_paraffins": 7.0,
                   "naphthenes": 5.0, "olefins": 5.0, "oxygenates": 5.0},
        "carbon": {"isoparaffins": {4: 3, 5: 18, 6: 14, 7: 12, 8: 40, 9: 10, 10: 3},
                   "aromatics": {6: 2, 7: 35, 8: 40, 9: 18, 10: 5},
                   "n_paraffins": {4: 15, 5: 30, 6: 25, 7: 15, 8: 10, 9: 5},
                   "naphthenes": {5: 20, 6: 45, 7: 25, 8: 10},
                   "olefins": {4: 25, 5: 40, 6: 25, 7: 10},
                   "oxygenates": {6: 1}},
        "fixed": {"2,2,4-trimethylpentane": 14.0, "benzene": 0.5},
    },
    "e10": {
        "groups": {"aromatics": 28.0, "isoparaffins": 32.0, "n_paraffins": 10.0,
                   "naphthenes": 7.0, "olefins": 12.0, "oxygenates": 11.0},
        "carbon": {"aromatics": {6: 3, 7: 30, 8: 35, 9: 25, 10: 7},
                   "isoparaffins": {4: 4, 5: 25, 6: 25, 7: 20, 8: 18, 9: 6, 10: 2},
                   "n_paraffins": {3: 1, 4: 12, 5: 25, 6: 22, 7: 18, 8: 12, 9: 6, 10: 3, 11: 1},
                   "naphthenes": {5: 15, 6: 40, 7: 30, 8: 15},
                   "olefins": {4: 20, 5: 35, 6: 30, 7: 15},
                   "oxygenates": {2: 1}},
        "fixed": {"ethanol": 10.0, "benzene": 0.7},
    },
}

EXAMPLE_KINDS = tuple(_PROFILES)


def example_composition(kind: str, library: Any = None, *, seed: int = 7) -> dict[str, float]:
    """An invented petrol composition built from library components [mass %].

    Parameters
    ----------
    kind : {"reformate", "alkylate", "e10"}
        Reformate-rich petrol, alkylate-rich petrol, or an E10 blend (10 mass % ethanol).
    library : dha.library.Library, optional
        Default: the shipped library.
    seed : int
        Seed of the within-cell weights.

    Returns
    -------
    dict
        Library name -> mass %, summing to 100.

    Notes
    -----
    Group totals and carbon-number profiles are invented (``_PROFILES``); within each
    (group, carbon number) cell the mass is spread over the library's components with
    log-normal weights (sigma = 1.2, each component's own draw, :func:`component_rng`), so a
    few components dominate each cell and many are traces, as in real petrol. Oxygenates are
    drawn only from those a market petrol may hold (:func:`dha.identify.expected_oxygenates`
    with default settings). Named components (``fixed``) take their mass first.
    For tests and the demo only: not a real sample.
    """
    if kind not in _PROFILES:
        raise InputError(f"example composition: unknown kind {kind!r}; use one of "
                         f"{', '.join(EXAMPLE_KINDS)}")
    if library is None:
        from dha.library import load_library
        library = load_library()
    prof = _PROFILES[kind]
    comps = library.components
    cell_seed = seed + sum(map(ord, kind))          # each component's weight: component_rng
    out: dict[str, float] = {}
    fixed = {k: v for k, v in prof["fixed"].items() if k in comps.index}
    for name, pct in fixed.items():
        out[name] = pct
    ri = pd.to_numeric(comps["retention_index"], errors="coerce")
    usable = comps[ri.notna()]
    # oxygenates: only those a market petrol may hold (dha.identify.expected_oxygenates with
    # default settings: EN 228's alcohols and the ethers), not research blend components
    from dha.identify import expected_oxygenates
    fuel_oxy = expected_oxygenates(library, {})
    usable = usable[(usable["group"] != "oxygenates") | usable.index.isin(list(fuel_oxy))]
    for group, total in prof["groups"].items():
        remaining = total - sum(v for k, v in fixed.items() if comps.at[k, "group"] == group)
        profile = prof["carbon"][group]
        in_group = usable[usable["group"] == group]
        cells = {c: in_group[in_group["carbon_number"] == c].index.difference(list(fixed))
                 for c in profile}
        cells = {c: idx for c, idx in cells.items() if len(idx)}
        if not cells:
            continue
        wsum = sum(profile[c] for c in cells)
        for c, idx in sorted(cells.items()):
            cell_mass = remaining * profile[c] / wsum
            w = np.exp(np.array([component_rng(cell_seed, "weight", n).normal(0.0, 1.2)
                                 for n in sorted(idx)]))
            for name, share in zip(sorted(idx), w / w.sum()):
                out[name] = out.get(name, 0.0) + cell_mass * share
    total = sum(out.values())
    return {k: 100.0 * v / total for k, v in sorted(out.items())}


# --------------------------------------------------------------------------------------------
# Runs of real compositions (for judging identification on what the project did not shape)
# --------------------------------------------------------------------------------------------

def real_fuel_run(library: Any, mixture_id: str, **kwargs: Any
                  ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """A synthetic run of one of the real fuels of :mod:`dha.fuel_data` (composition from the
    data, peaks placed by :func:`synthetic_run` with ``kwargs``)."""
    from dha.fuel_data import composition
    return synthetic_run(composition(library, mixture_id), library, **kwargs)


def lab_standard(programme: Mapping[str, float] | None = None,
                 carbons: range = range(3, 14)) -> dict[str, float]:
    """The retention times of a lab's n-alkane standard (C3-C13) under the programme, as
    ``identify.markers`` takes them ({"5": 7.98, ...}) [min]."""
    return {str(c): t for c, t in alkane_retention_times(programme).items() if c in carbons}
