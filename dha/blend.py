r"""Blends of streams and the cheapest recipe meeting a specification.

:func:`blend_tables` mixes composition tables (from results or inputs) in given volume
proportions: each component's volume is the proportion-weighted sum of its volume fractions
(volumes additive, the convention of the composition tables themselves), masses follow from
each component's density and mole amounts from its molar mass, exactly as ``dha.quantify``
computes them. The blend's properties then come from every property model on the blend's
composition (:func:`dha.levers.evaluate`), never from averaging the streams' properties: the
octane, vapour-pressure and distillation models are non-linear in composition.

:func:`recipe` searches the proportions (``scipy.optimize.minimize``, SLSQP, from several
starts) that meet every limit of a specification profile at the lowest cost per volume. Inside
the search the same models are called through fast paths on the union of the streams'
components (octane via ``octane.predict_inputs``/the batched call of ``dha.explain``, DVPE by the
volatility module's flash, the distillation by its Rayleigh curve, composition limits and
density exactly); the recipe found is then run through the full evaluation and the
specification check. A limit that fails there is tightened by its miss and the search repeated
(at most ``MAX_ROUNDS`` times). When no blend meets the profile, the answer names the limit that
makes it impossible: one no blend of these streams can meet (with the best value reachable),
or the set of limits that cannot be met together.
"""
from __future__ import annotations

import dataclasses
import logging
from typing import Any

import numpy as np
import pandas as pd
from scipy.optimize import minimize

from dha.errors import InputError, SettingsError
from dha.levers import atom_counts, evaluate, with_masses

log = logging.getLogger("dha.blend")

#: Distillation step inside the search [% v/v] (the full check uses the settings' step).
SEARCH_STEP = 5.0
#: Search rounds (search, full check, tighten failing limits).
MAX_ROUNDS = 4
#: Quantities the search models directly; other limits are checked on the recipe found.
FAST_QUANTITIES = ("ron", "mon", "aki", "sensitivity", "dvpe_kpa", "density_kg_m3",
                   "benzene_vol_pct", "aromatics_vol_pct", "olefins_vol_pct",
                   "oxygen_mass_pct", "ethanol_vol_pct", "methanol_vol_pct",
                   "ethers_c5plus_vol_pct", "e70_vol_pct", "e100_vol_pct", "e150_vol_pct",
                   "t10_c", "t50_c", "t90_c", "fbp_c")
_DISTILLATION = ("e70_vol_pct", "e100_vol_pct", "e150_vol_pct", "t10_c", "t50_c", "t90_c",
                 "fbp_c")


def _row_key(r) -> tuple:
    comp = r.get("component")
    if isinstance(comp, str) and comp:
        return ("c", comp)
    return ("u", str(r.get("name")), str(r.get("group")), int(r.get("carbon_number")),
            str(r.get("model_component")))


def union_volumes(tables: list[pd.DataFrame]) -> tuple[pd.DataFrame, np.ndarray]:
    """(union table of rows, matrix k x n of each stream's volume fraction of every row).

    Rows are the same library component (by ``component``), or unidentified peaks with the
    same name, group, carbon number and model component.
    """
    keys: dict[tuple, int] = {}
    rows = []
    for t in tables:
        for rec in t.to_dict(orient="records"):
            k = _row_key(rec)
            if k not in keys:
                keys[k] = len(rows)
                rows.append(rec)
    vol = np.zeros((len(tables), len(rows)))
    for s, t in enumerate(tables):
        v = t["vol_pct"].to_numpy(float)
        v = v / v.sum()
        for rec, x in zip(t.to_dict(orient="records"), v):
            vol[s, keys[_row_key(rec)]] += x
    return pd.DataFrame(rows, columns=tables[0].columns).reset_index(drop=True), vol


def blend_tables(tables: list[pd.DataFrame], vol_parts) -> pd.DataFrame:
    """Composition table of a blend of ``tables`` in volume proportions ``vol_parts``.

    >>> import pandas as pd
    >>> a = pd.DataFrame({"name": ["x"], "component": ["x"], "group": ["n_paraffins"],
    ...     "carbon_number": [7], "model_component": ["x"], "vol_pct": [100.0],
    ...     "mass_pct": [100.0], "mol_pct": [100.0], "molar_mass_g_mol": [100.0],
    ...     "density_kg_m3": [700.0]})
    >>> b = a.assign(name=["y"], component=["y"], model_component=["y"], density_kg_m3=[800.0])
    >>> t = blend_tables([a, b], [1, 1])
    >>> t["vol_pct"].round(6).tolist(), t["mass_pct"].round(4).tolist()
    ([50.0, 50.0], [46.6667, 53.3333])
    """
    if len(tables) != len(vol_parts) or not tables:
        raise InputError("give one volume share per stream")
    p = np.asarray(vol_parts, dtype=float)
    if np.any(p < 0) or p.sum() <= 0:
        raise InputError("volume shares must be >= 0 and not all zero")
    union, vol = union_volumes(tables)
    v = (p / p.sum()) @ vol
    return with_masses(union, v * union["density_kg_m3"].to_numpy(float))


def blend_results(samples, vol_parts, library, settings: dict, profile: dict | None = None
                  ) -> dict[str, Any]:
    """Full result of the blend of ``samples`` (``dha.levers.Sample``) in ``vol_parts``, with
    the streams' own key values and the linear volume average beside it (for comparison)."""
    from dha.levers import COMPARED, key_values
    table = blend_tables([s.table for s in samples], vol_parts)
    label = " + ".join(f"{p:g} {s.label}" for s, p in zip(samples, vol_parts))
    result = evaluate(table, library, settings, profile, f"blend: {label}")
    streams = []
    for s in samples:
        res = s.result or evaluate(s.table, library, settings, None, s.label)
        streams.append({"label": s.label, "values": key_values(res, library)})
    p = np.asarray(vol_parts, float) / float(np.sum(vol_parts))
    linear = {}
    for k in COMPARED:
        vals = [st["values"].get(k) for st in streams]
        linear[k] = None if any(v is None for v in vals) else float(p @ np.array(vals))
    result["blend"] = {"streams": [{**st, "vol_pct": 100.0 * x} for st, x in zip(streams, p)],
                       "linear_volume_average": linear,
                       "note": "properties of the blend come from the models on its "
                               "composition; the linear average is shown for comparison only"}
    return result


# --------------------------------------------------------------------------------------------
# Fast model of a blend of fixed streams
# --------------------------------------------------------------------------------------------

class BlendModel:
    """The specification quantities of ``p @ streams`` for many proportion vectors ``p``."""

    def __init__(self, tables, library, settings):
        from dha.explain import predict_matrix
        from dha.properties import octane, volatility
        self.library, self.settings = library, settings
        self.union, self.vol = union_volumes(tables)
        self.k = len(tables)
        start = with_masses(self.union, self.vol.mean(axis=0)
                            * self.union["density_kg_m3"].to_numpy(float))
        # every union row has volume in at least one stream, so none was dropped
        self.table = start
        self.inputs = octane.model_inputs(start, library.components)
        self._predict = predict_matrix
        act = settings.get("volatility", {}).get("activity", "unifac")
        self.mix = volatility.mixture_from_composition(start, library, act)
        self.volatility = volatility
        cfg = settings.get("volatility", {})
        self.curve_kind = cfg.get("distillation_curve", "equilibrium")
        # a coarser step inside the search (the recipe found is checked at the set step)
        self.curve_step = max(float(cfg.get("distillation_step_vol_pct", 2.0)), SEARCH_STEP)
        mc = start["model_component"].astype(str).to_numpy()
        self.mix_index = pd.Index(self.mix.names).get_indexer(mc)
        self.rho = start["density_kg_m3"].to_numpy(float)
        self.mw = start["molar_mass_g_mol"].to_numpy(float)
        self.o_mass = atom_counts(start, library)[:, 2] * 15.999 / self.mw
        group = start["group"].astype(str).to_numpy()
        cas = start["cas"].astype(object).to_numpy()
        comps = library.components
        self.masks = {
            "benzene_vol_pct": cas == "71-43-2",
            "aromatics_vol_pct": group == "aromatics",
            "olefins_vol_pct": group == "olefins",
            "ethanol_vol_pct": cas == "64-17-5",
            "methanol_vol_pct": cas == "67-56-1",
            "ethers_c5plus_vol_pct": np.array([
                isinstance(m, str) and m in comps.index and comps.at[m, "subgroup"] == "ether"
                and int(comps.at[m, "carbon_number"]) >= 5 for m in mc]),
        }
        self._cache: dict[tuple, dict[str, float]] = {}

    def volume(self, p) -> np.ndarray:
        p = np.clip(np.asarray(p, float), 0.0, None)
        return (p / p.sum()) @ self.vol

    def values(self, p, need=FAST_QUANTITIES) -> dict[str, float]:
        """Quantities of the blend with proportions ``p`` (the distillation only when a
        quantity of ``need`` asks for it); cached per ``p``."""
        key = tuple(np.round(np.asarray(p, float), 12))
        out = self._cache.get(key)
        if out is None:
            out = self._core(p)
            self._cache[key] = out
        if any(q in need for q in _DISTILLATION) and "t50_c" not in out:
            vol = self.volatility
            curve = vol.distillation_curve_c(out.pop("_mix"), self.curve_kind, vol.P_ATM_KPA,
                                             self.curve_step)
            pts = vol.distillation_points(curve["evaporated_vol_pct"].to_numpy(),
                                          curve["t_c"].to_numpy())
            out.update({k: float(pts[k]) for k in _DISTILLATION if pts.get(k) is not None})
        return out

    def _core(self, p) -> dict[str, Any]:
        v = self.volume(p)
        out: dict[str, Any] = {}
        octs = self._predict(self.inputs, v[None, :], self.settings)
        out["ron"], out["mon"] = float(octs["ron"][0]), float(octs["mon"][0])
        out["aki"] = 0.5 * (out["ron"] + out["mon"])
        out["sensitivity"] = out["ron"] - out["mon"]
        m = v * self.rho
        out["density_kg_m3"] = float(m.sum() / v.sum())
        out["oxygen_mass_pct"] = 100.0 * float(m @ self.o_mass / m.sum())
        for q, mask in self.masks.items():
            out[q] = 100.0 * float(v[mask].sum() / v.sum())
        mol = m / self.mw
        z = np.zeros(len(self.mix.names))
        np.add.at(z, self.mix_index, mol)
        mix = dataclasses.replace(self.mix, z=z / z.sum())
        vol = self.volatility
        flash = vol.flash_volume_ratio(mix, vol.T_DVPE_K, vol.VL_RATIO)
        out["dvpe_kpa"] = float(vol.dvpe_kpa_from_total(flash.p_kpa))
        out["_mix"] = mix
        return out


# --------------------------------------------------------------------------------------------
# Recipe search
# --------------------------------------------------------------------------------------------

def _limits(profile: dict) -> list[dict[str, Any]]:
    return [{"quantity": lim["quantity"], "kind": lim["kind"], "value": float(lim["value"])}
            for lim in profile["limits"]]


def _slack(values: dict[str, float], lim: dict[str, Any], shift: float = 0.0) -> float | None:
    v = values.get(lim["quantity"])
    if v is None or not np.isfinite(v):
        return None
    target = lim["value"] + (shift if lim["kind"] == "min" else -shift)
    return (v - target) if lim["kind"] == "min" else (target - v)


def _slack_or(values, lim, missing: float = -1e3) -> float:
    s = _slack(values, lim)
    return missing if s is None else s


def _scale(lim) -> float:
    return max(abs(lim["value"]) * 0.01, 0.1)


def recipe(samples, costs, profile: dict, library, settings: dict, min_vol_pct=None,
           max_vol_pct=None, guard: bool = False) -> dict[str, Any]:
    """Cheapest volume proportions of ``samples`` meeting ``profile``.

    Parameters
    ----------
    samples : list of ``dha.levers.Sample`` (the streams)
    costs : cost per volume of each stream (any currency per m³)
    profile : ``dha.specs.load_profile`` output
    min_vol_pct, max_vol_pct : optional bounds on each stream's share [% v/v]
    guard : require each value inside its limit by the expanded uncertainty (2u) of the
        result, so that the check says "pass" rather than "marginal"

    Returns
    -------
    dict: ``feasible``, ``vol_pct`` per stream, ``cost_per_m3``, ``binding`` (limits and
    share bounds at their edge), ``impossible`` (why, when not feasible), ``checks`` of the
    full evaluation, ``result`` (the blend's full result) and ``rounds``.
    """
    k = len(samples)
    if k < 2:
        raise InputError("a recipe needs at least two streams")
    c = np.asarray(costs, dtype=float)
    if c.shape != (k,) or not np.all(np.isfinite(c)):
        raise InputError("give one cost per stream")
    lo = np.zeros(k) if min_vol_pct is None else np.asarray(
        [0.0 if x is None or pd.isna(x) else x for x in min_vol_pct], float) / 100.0
    hi = np.ones(k) if max_vol_pct is None else np.asarray(
        [1.0 if x is None or pd.isna(x) else x / 100.0 for x in max_vol_pct], float)
    if np.any(lo > hi) or lo.sum() > 1 + 1e-12 or hi.sum() < 1 - 1e-12:
        raise SettingsError("stream share bounds cannot add up to 100 % v/v; check "
                            "min_vol_pct / max_vol_pct")
    model = BlendModel([s.table for s in samples], library, settings)
    limits = _limits(profile)
    fast = [lim for lim in limits if lim["quantity"] in FAST_QUANTITIES]
    need = {lim["quantity"] for lim in fast}
    shift = {i: 0.0 for i in range(len(fast))}
    if guard:
        # the uncertainties where the limits bind: those of the recipe without guard bands
        first = recipe(samples, costs, profile, library, settings, min_vol_pct, max_vol_pct,
                       guard=False)
        if not first["feasible"]:
            return first
        unc = first["result"].get("uncertainty") or {}
        for i, lim in enumerate(fast):
            u = unc.get(lim["quantity"])
            shift[i] = 2.0 * float(u) if u else 0.0

    def cons_vec(p):
        vals = model.values(p, need)
        out = []
        for i, lim in enumerate(fast):
            s = _slack(vals, lim, shift[i])
            out.append(-1e3 if s is None else s / _scale(lim))
        return np.array(out)

    bounds = list(zip(lo, hi))
    starts = [np.clip(np.full(k, 1.0 / k), lo, hi)]
    cheap = np.full(k, 0.3 / max(k - 1, 1))
    cheap[int(np.argmin(c))] = 0.7
    starts.append(np.clip(cheap, lo, hi))
    rounds = []
    best = None
    for rnd in range(MAX_ROUNDS):
        best = None
        for x0 in starts:
            x0 = x0 / x0.sum()
            res = minimize(lambda p: float(c @ p) / max(np.abs(c).max(), 1e-12), x0,
                           method="SLSQP", bounds=bounds,
                           constraints=[{"type": "eq", "fun": lambda p: p.sum() - 1.0},
                                        {"type": "ineq", "fun": cons_vec}],
                           options={"maxiter": 100, "ftol": 1e-9})
            p = np.clip(res.x, lo, hi)
            p = p / p.sum()
            ok = bool(np.all(cons_vec(p) >= -1e-6))
            if ok and (best is None or c @ p < c @ best - 1e-12):
                best = p
        if best is None:
            break
        table = blend_tables([s.table for s in samples], best)
        result = evaluate(table, library, settings, profile, "recipe")
        fails = [ch for ch in result["checks"] if ch["verdict"] == "fail"
                 or (guard and ch["verdict"] == "marginal")]
        rounds.append({"vol_pct": (100 * best).tolist(), "failed": [
            f"{ch['property']} {ch['kind']} {ch['limit']:g}: {ch['value']:.4g}" for ch in fails]})
        if not fails:
            binding = []
            vals = model.values(best, need)
            for i, lim in enumerate(fast):
                s = _slack(vals, lim, shift[i])
                if s is not None and abs(s) / _scale(lim) < 1e-3:
                    binding.append(f"{lim['quantity']} {lim['kind']} {lim['value']:g}")
            for j, s in enumerate(samples):
                if best[j] <= lo[j] + 1e-6 and lo[j] > 0:
                    binding.append(f"share of {s.label} >= {100 * lo[j]:g} % v/v")
                if best[j] >= hi[j] - 1e-6 and hi[j] < 1:
                    binding.append(f"share of {s.label} <= {100 * hi[j]:g} % v/v")
            return {"feasible": True,
                    "vol_pct": {s.label: 100.0 * float(x) for s, x in zip(samples, best)},
                    "cost_per_m3": float(c @ best), "binding": binding, "impossible": None,
                    "checks": result["checks"], "result": result, "rounds": rounds}
        # tighten the limits the full check failed by their miss (fast path vs full model)
        vals = model.values(best, need)
        changed = False
        for ch in fails:
            for i, lim in enumerate(fast):
                if lim["quantity"] == ch["property"] and lim["kind"] == ch["kind"]:
                    s_fast = _slack(vals, lim, 0.0) or 0.0
                    s_full = (ch["value"] - ch["limit"]) if ch["kind"] == "min" \
                        else (ch["limit"] - ch["value"])
                    need_shift = (2.0 * float(ch.get("uncertainty") or 0.0) if guard else 0.0)
                    shift[i] = max(shift[i], s_fast - s_full + need_shift) + 1e-3 * _scale(lim)
                    changed = True
        if not changed:
            break
    return {"feasible": False, "vol_pct": None, "cost_per_m3": None, "binding": [],
            "impossible": diagnose(model, fast, lo, hi, samples, need,
                                   [shift[i] for i in range(len(fast))]),
            "checks": [], "result": None, "rounds": rounds}


def diagnose(model: BlendModel, fast, lo, hi, samples, need, shifts=None) -> dict[str, Any]:
    """Why no blend meets the limits: a limit no blend can meet alone, or a conflicting set.

    ``shifts``: per limit, the margin the search required inside it (guard band, or the
    tightening after a full check); a shifted limit is named with its margin."""
    shifts = list(shifts) if shifts is not None else [0.0] * len(fast)

    def label(i, lim):
        m = shifts[i]
        return f"{lim['quantity']} {lim['kind']} {lim['value']:g}" + (
            f" (with a margin of {m:.3g})" if m > 1e-9 else "")

    def slack_i(vals, i, lim):
        return _slack(vals, lim, shifts[i])

    k = len(lo)
    bounds = list(zip(lo, hi))
    eq = [{"type": "eq", "fun": lambda p: p.sum() - 1.0}]
    starts = [np.clip(np.full(k, 1.0 / k), lo, hi)] + [np.clip(np.eye(k)[j] * 0.9 + 0.1 / k,
                                                               lo, hi) for j in range(k)]
    alone = []
    for i, lim in enumerate(fast):
        one = {lim["quantity"]}

        def own(vals, i=i, lim=lim):
            v = slack_i(vals, i, lim)
            return -1e3 if v is None else v

        tried = [(own(model.values(x0 / x0.sum(), one)), x0 / x0.sum()) for x0 in starts]
        if max(t[0] for t in tried) >= 0:
            continue
        best_s, best_p = max(tried, key=lambda t: t[0])
        for x0 in starts[:2]:
            res = minimize(lambda p: -own(model.values(p, one)), x0 / x0.sum(),
                           method="SLSQP", bounds=bounds, constraints=eq,
                           options={"maxiter": 60})
            p = np.clip(res.x, lo, hi)
            p = p / p.sum()
            sv = own(model.values(p, one))
            if sv > best_s:
                best_s, best_p = sv, p
        if best_s < 0:
            best_val = model.values(best_p, need).get(lim["quantity"])
            alone.append({"limit": label(i, lim),
                          "best_value": best_val,
                          "at_vol_pct": {s.label: 100.0 * float(x)
                                         for s, x in zip(samples, best_p)}})
    if alone:
        names = ", ".join(a["limit"] for a in alone)
        return {"reason": f"no blend of these streams can meet {names}", "limits": alone}

    def violation(p):
        vals = model.values(p, need)
        return sum(min(0.0, (slack_i(vals, i, lim) or 0.0) / _scale(lim)) ** 2
                   for i, lim in enumerate(fast))

    res = min((minimize(violation, x0 / x0.sum(), method="SLSQP", bounds=bounds,
                        constraints=eq, options={"maxiter": 80}) for x0 in starts),
              key=lambda r: r.fun)
    p = np.clip(res.x, lo, hi)
    p = p / p.sum()
    vals = model.values(p, need)
    broken = [f"{label(i, lim)} (at best {vals.get(lim['quantity']):.4g})"
              for i, lim in enumerate(fast) if (slack_i(vals, i, lim) or 0.0) < -1e-4 * _scale(lim)]
    if not broken:
        broken = ["none found violated at the closest point; the search did not converge "
                  "(try bounds on the shares)"]
    return {"reason": "each limit can be met alone, but not together: " + "; ".join(broken),
            "limits": broken,
            "closest_vol_pct": {s.label: 100.0 * float(x) for s, x in zip(samples, p)}}


def read_streams(path, settings: dict, library) -> tuple[list, list[float], list, list]:
    """Streams of a recipe CSV: columns ``stream`` (label), ``file`` (result JSON or input,
    relative to the CSV's folder), ``cost_per_m3``; optional ``min_vol_pct``, ``max_vol_pct``."""
    from pathlib import Path

    from dha.levers import load_samples
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: file not found; give the streams CSV")
    try:
        table = pd.read_csv(path, comment="#")
    except (pd.errors.ParserError, UnicodeDecodeError) as err:
        raise InputError(f"{path.name}: not a readable CSV ({err})") from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    missing = [c for c in ("stream", "file", "cost_per_m3") if c not in table.columns]
    if missing:
        raise InputError(f"{path.name}: column(s) {', '.join(missing)} missing; need stream, "
                         "file, cost_per_m3 (optional min_vol_pct, max_vol_pct)")
    samples, costs, lo, hi = [], [], [], []
    for i, r in table.iterrows():
        cost = pd.to_numeric(pd.Series([r["cost_per_m3"]]), errors="coerce").iloc[0]
        if pd.isna(cost):
            raise InputError(f"{path.name}, row {i + 2}: cost_per_m3 {r['cost_per_m3']!r} is "
                             "not a number")
        found = load_samples(path.parent / str(r["file"]).strip(), settings, library)
        s = found[0]
        s.label = str(r["stream"])
        samples.append(s)
        costs.append(float(cost))
        lo.append(pd.to_numeric(pd.Series([r.get("min_vol_pct")]), errors="coerce").iloc[0])
        hi.append(pd.to_numeric(pd.Series([r.get("max_vol_pct")]), errors="coerce").iloc[0])
    return samples, costs, lo, hi
