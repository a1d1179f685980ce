r"""Volatility from a composition: DVPE, RVP, VLI and an estimated distillation curve.

Phase model (both calculations): modified Raoult's law with an ideal gas,

.. math:: y_i P = x_i \gamma_i(x, T) P^{sat}_i(T)

γ from original UNIFAC (:mod:`dha.properties.unifac`; setting ``volatility.activity =
"unifac"``) or γ = 1 (``"ideal"``), P^sat from the library's correlations.

DVPE (ASTM D5191; EN 13016-1 the same, from memory): an isothermal flash of the liquid at
37.8 °C (310.93 K) in a closed chamber whose vapour volume is 4 times the equilibrium liquid
volume. The flash gives the total pressure P_tot; then DVPE = 0.965·P_tot − 3.78 kPa
(ASTM D5191-19 / EN 13016-1:2018). Dissolved air is not modelled: the sample is taken as air-free, so P_tot is
the pure vapour pressure of the petrol at V/L = 4 (the air a real air-saturated sample adds is
one reason the standard's correlation has its constants). Liquid molar volumes are those at
15 °C (M/ρ15); thermal expansion to 37.8 °C (about 3 %) is ignored — it changes the vapour
volume and so P_tot by far less than 0.1 kPa.

Distillation: a differential (Rayleigh) batch distillation at 101.325 kPa. The liquid is
always at its bubble point; the vapour in equilibrium with it is removed. Volumes are liquid
volumes at 15 °C. Setting ``volatility.distillation_curve`` chooses what is reported:

- ``"equilibrium"`` (default): the Rayleigh curve itself (bubble temperature of the liquid
  against volume % evaporated). A D86 flask is close to such a one-stage still.
- ``"riazi-daubert"``: the Rayleigh curve taken as TBP-like and converted to D86-like
  temperatures with the Riazi–Daubert (1986) correlation in its reverse, **kelvin** form
  (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a): T_D86 = a·T_TBP^b at 0, 10, 30, 50, 70, 90 and
  95 % evaporated; in between the D86 − TBP shift is interpolated linearly in volume % and
  added to the curve (exact at the seven points; beyond 95 % the 95 % shift holds).
  Not the default: the Rayleigh curve is already an equilibrium (one-stage) curve, far flatter
  than a TBP at its front, and the correlation adds about 20 °C at 0–10 %; for the invented
  base petrol of the tests it gives IBP 86 °C, T10 88 °C and E70 = 0 % (T50 110 °C).
- ``"boiling-order"``: the simple common route, an ideal TBP (components in
  boiling-point order) converted by the same Riazi–Daubert coefficients; no activity model,
  so no ethanol effect.

The reported curve's uncertainty uses the difference between the chosen curve and another
route (see :func:`compute`). E70, E100, E150 are read from the curve. FBP is the temperature
at 98 % evaporated (a D86 end point is reached with about 2 % v/v left as residue and loss;
EN 228 caps residue at 2 % v/v — common practice, no source).
"""
from __future__ import annotations

import logging
import weakref
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from dha.errors import LibraryError, SettingsError
from dha.memo import ObjectMemo
from dha.properties import PropertyResult
from dha.properties.unifac import UnifacModel, build_model, parameters_from_library

log = logging.getLogger("dha.volatility")

#: DVPE test temperature, 37.8 °C = 100 °F [K] (ASTM D5191).
T_DVPE_K = 310.93
#: Vapour/liquid volume ratio of the DVPE chamber [-] (ASTM D5191).
VL_RATIO = 4.0
#: Distillation pressure [kPa].
P_ATM_KPA = 101.325
#: Molar gas constant [J/(mol K)] (CODATA 2018, exact).
R_J_MOL_K = 8.314462618
#: kPa per psi (1 psi = 6.894757 kPa).
KPA_PER_PSI = 6.894757

#: Riazi–Daubert (1986) TBP -> D86, kelvin set: T_D86 = a·T_TBP^b (Wauquier, Petroleum
#: Refining vol. 1, Table 4.16a; Riazi & Daubert 1986). Rows: volume % evaporated, a, b.
RIAZI_DAUBERT_TBP_TO_D86_K = np.array([
    [0.0, 1.08947, 0.99810],
    [10.0, 1.71243, 0.91743],
    [30.0, 1.29838, 0.95923],
    [50.0, 1.10755, 0.98270],
    [70.0, 1.13047, 0.97790],
    [90.0, 1.04643, 0.98912],
    [95.0, 1.21455, 0.96572],
])
#: Components without UNIFAC groups (e.g. methane) up to this share [mol %] take gamma = 1
#: while UNIFAC covers the rest (gamma computed over the rest, renormalised); above it the
#: whole mixture is treated as ideal, with a warning.
MAX_NO_GROUPS_MOL_PCT = 1.0
#: Tolerance on ln(P_bubble/P) of the bubble points along a distillation [-]: 1e-7 is
#: about 3e-6 K (d ln P/dT is about 0.035 /K for petrol components near their boiling
#: points); the public :func:`bubble_temperature_k` keeps 1e-9.
STEP_TOL = 1e-7
#: Extra points of the distillation near its end [% evaporated].
TAIL_VOL_PCT = np.array([95.0, 96.0, 97.0, 98.0, 98.5, 99.0, 99.5])
#: Volume % evaporated at which the D86-like FBP is read (see module notes).
FBP_EVAPORATED_PCT = 98.0

#: Standard uncertainty of P_tot from the activity model, relative [-]. Basis: original and
#: Dortmund UNIFAC differ by 6 % (hydrocarbon blend) and 7 % (E10) in P at V/L = 4
#: (flash of an invented E10 blend with thermo 0.6.1, original vs Dortmund 2016 parameters); half that spread, rounded up, is taken as
#: one standard uncertainty. No comparison with measured DVPE of petrols was available.
U_PTOT_REL = 0.04
#: Average error of the Riazi–Daubert TBP/D86 conversion [°C] (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a).
U_RIAZI_DAUBERT_C = 5.0
#: Extra standard uncertainty of the FBP rule [°C] (judgement, no source).
U_FBP_RULE_C = 10.0


# -- vapour pressures on a temperature grid ------------------------------------------------------

#: Temperature nodes [K] for ln P^sat interpolation (2 K apart, with 310.93 K exactly).
T_GRID_K = np.unique(np.concatenate([np.arange(200.0, 700.0 + 1e-9, 2.0), [T_DVPE_K]]))


@dataclass(frozen=True)
class PsatGrid:
    """ln P^sat of N components on a grid of temperatures, interpolated linearly in 1/T.

    t_k : (G,) nodes [K], increasing; ln_p_kpa : (N, G)
    """

    t_k: np.ndarray
    ln_p_kpa: np.ndarray

    @cached_property
    def _by_node(self) -> np.ndarray:
        # node-major copy (one contiguous row per temperature node): an evaluation reads two
        # rows instead of two strided columns
        return np.ascontiguousarray(np.asarray(self.ln_p_kpa).T)

    @cached_property
    def _inv_t(self) -> np.ndarray:
        return 1.0 / np.asarray(self.t_k, dtype=float)

    @cached_property
    def finite_rows(self) -> np.ndarray:
        """Whether each component's ln P^sat is finite at every node, (N,)."""
        return np.isfinite(self.ln_p_kpa).all(axis=1)

    def _cell(self, t_k: float) -> tuple[int, float]:
        t = self.t_k
        j = min(max(int(np.searchsorted(t, t_k)) - 1, 0), len(t) - 2)
        inv = self._inv_t
        return j, (1.0 / t_k - inv[j]) / (inv[j + 1] - inv[j])

    def ln_psat(self, t_k: float) -> np.ndarray:
        """ln(P^sat/kPa) at ``t_k`` [K], shape (N,); linear in 1/T, extrapolated at the ends."""
        j, w = self._cell(t_k)
        return self._by_node[j] * (1.0 - w) + self._by_node[j + 1] * w

    def ln_psat_slope(self, t_k: float) -> tuple[np.ndarray, np.ndarray]:
        """(ln P^sat at ``t_k``, its derivative d ln P^sat / d(1/T) [K]), both (N,)."""
        j, w = self._cell(t_k)
        lo, hi = self._by_node[j], self._by_node[j + 1]
        return lo * (1.0 - w) + hi * w, (hi - lo) / (self._inv_t[j + 1] - self._inv_t[j])

    def psat_kpa(self, t_k: float) -> np.ndarray:
        return np.exp(self.ln_psat(t_k))

    def take(self, rows) -> "PsatGrid":
        return PsatGrid(self.t_k, self.ln_p_kpa[rows])


#: Minimum distance [K] of a boiling point from a correlation's range for it to anchor the
#: extension of ln P (see :func:`_fill_outside`).
ANCHOR_MIN_GAP_K = 10.0


def _fill_outside(ln_p: np.ndarray, valid: np.ndarray, t_grid_k: np.ndarray,
                  anchor_t_k: np.ndarray | None = None) -> np.ndarray:
    """Replace ln P where ``valid`` is False, linearly in 1/T (Clausius–Clapeyron).

    Known points of a row: its valid nodes, plus its normal boiling point (``anchor_t_k``,
    101.325 kPa) when that lies more than :data:`ANCHOR_MIN_GAP_K` outside the valid nodes'
    span (closer, the slope between the two would be dominated by their small
    inconsistencies). Between known points ln P is
    interpolated in 1/T; beyond them it is extended with the slope of the two outermost
    points. Rows with fewer than two known points are left as they are.
    """
    ln_p = ln_p.copy()
    inv = 1.0 / t_grid_k
    for i in np.flatnonzero(~valid.all(axis=1)):
        good = np.flatnonzero(valid[i])
        u, y = list(inv[good]), list(ln_p[i, good])
        if anchor_t_k is not None and np.isfinite(anchor_t_k[i]) and len(good) and (
                anchor_t_k[i] < t_grid_k[good[0]] - ANCHOR_MIN_GAP_K
                or anchor_t_k[i] > t_grid_k[good[-1]] + ANCHOR_MIN_GAP_K):
            u.append(1.0 / anchor_t_k[i])
            y.append(np.log(P_ATM_KPA))
        if len(u) < 2:
            continue
        order = np.argsort(u)
        u, y = np.asarray(u)[order], np.asarray(y)[order]
        cells = ~valid[i]
        x = inv[cells]
        out = np.interp(x, u, y)
        lo, hi = x < u[0], x > u[-1]
        out[lo] = y[0] + (y[1] - y[0]) / (u[1] - u[0]) * (x[lo] - u[0])
        out[hi] = y[-1] + (y[-1] - y[-2]) / (u[-1] - u[-2]) * (x[hi] - u[-1])
        ln_p[i, cells] = out
    return ln_p


def psat_grid(psat_kpa_at, n: int, t_grid_k: np.ndarray = T_GRID_K) -> PsatGrid:
    """Tabulate ln P^sat from ``psat_kpa_at(t_k) -> (n,) array [kPa]`` on ``t_grid_k``.

    Values that are not finite or not positive are replaced as in :func:`_fill_outside`.
    """
    table = np.empty((n, len(t_grid_k)))
    for g, t in enumerate(t_grid_k):
        table[:, g] = np.asarray(psat_kpa_at(float(t)), dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_p = np.log(np.where(table > 0, table, np.nan))
    return PsatGrid(np.asarray(t_grid_k, float), _fill_outside(ln_p, np.isfinite(ln_p),
                                                                 np.asarray(t_grid_k, float)))


def correlation_psat_grid(table: pd.DataFrame, t_grid_k: np.ndarray = T_GRID_K,
                          boiling_point_k: np.ndarray | None = None) -> PsatGrid:
    """ln P^sat on ``t_grid_k`` for the rows of a ``vapour_pressure.csv``-shaped table.

    Each correlation is used inside its validity range [``tmin_k``, ``tmax_k``] (and below
    ``tc_k`` for the Wagner form); outside it ln P is extended linearly in 1/T
    (Clausius–Clapeyron) through the range ends and, when given and outside the range, the
    normal boiling point ``boiling_point_k`` [K] at 101.325 kPa — never the correlation's own
    extrapolation.
    """
    from dha.vapour_pressure import psat_kpa

    n, g = len(table), len(t_grid_k)
    tmin = pd.to_numeric(table.get("tmin_k"), errors="coerce") if "tmin_k" in table else None
    lo = np.full(n, -np.inf) if tmin is None else np.nan_to_num(tmin.to_numpy(float), nan=-np.inf)
    hi = (np.full(n, np.inf) if "tmax_k" not in table else
          np.nan_to_num(pd.to_numeric(table["tmax_k"], errors="coerce").to_numpy(float),
                        nan=np.inf))
    if "tc_k" in table:
        tc = pd.to_numeric(table["tc_k"], errors="coerce").to_numpy(float)
        wagner = table["equation"].astype(str).str.strip().str.lower().to_numpy() == "wagner25"
        hi = np.where(wagner & np.isfinite(tc), np.minimum(hi, tc - 0.5), hi)
    t = np.broadcast_to(t_grid_k, (n, g))
    valid = (t >= lo[:, None]) & (t <= hi[:, None])
    enough = valid.sum(axis=1) >= 2
    valid[~enough] = True                        # too narrow a range: use the correlation as is
    clipped = np.where(valid, t, np.clip(t, lo[:, None], hi[:, None]))
    rows = table.reset_index(drop=True).iloc[np.repeat(np.arange(n), g)].reset_index(drop=True)
    values = np.asarray(psat_kpa(rows, clipped.ravel()), dtype=float).reshape(n, g)
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_p = np.log(np.where(values > 0, values, np.nan))
    valid &= np.isfinite(ln_p)
    return PsatGrid(np.asarray(t_grid_k, float),
                    _fill_outside(ln_p, valid, np.asarray(t_grid_k), boiling_point_k))


_LIBRARY_GRIDS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()


def library_psat_grid(library) -> tuple[PsatGrid, pd.Index]:
    """ln P^sat of every library component on :data:`T_GRID_K` (cached per library object).

    Uses ``library.vapour_pressure`` through :func:`correlation_psat_grid` when the library
    has that table, else ``library.psat_kpa(t_k)`` at each node.
    """
    try:
        cached = _LIBRARY_GRIDS.get(library)
    except TypeError:
        cached = None
    if cached is not None:
        return cached
    table = getattr(library, "vapour_pressure", None)
    if isinstance(table, pd.DataFrame) and len(table):
        names = pd.Index(table.index if table.index.name == "name" or "name" not in table
                         else table["name"])
        tb = None
        comps = getattr(library, "components", None)
        if isinstance(comps, pd.DataFrame) and "boiling_point_c" in comps:
            tb = pd.to_numeric(comps["boiling_point_c"].reindex(names),
                               errors="coerce").to_numpy(float) + 273.15
        grid = correlation_psat_grid(table, boiling_point_k=tb)
    else:
        names = library.psat_kpa(T_DVPE_K).index
        grid = psat_grid(lambda t: library.psat_kpa(t).reindex(names).to_numpy(float),
                         len(names))
    try:
        _LIBRARY_GRIDS[library] = (grid, names)
    except TypeError:
        pass
    return grid, names


# -- the mixture ------------------------------------------------------------------------------------

@dataclass
class Mixture:
    """A liquid feed for the phase calculations.

    names : component names; z : mole fractions [-]; molar_volume_m3_mol : liquid molar
    volume at 15 °C [m³/mol]; psat : :class:`PsatGrid`; unifac : model or None (ideal);
    boiling_point_k : normal boiling points [K] (optional, for the boiling-order curve).
    """

    names: list[str]
    z: np.ndarray
    molar_volume_m3_mol: np.ndarray
    psat: PsatGrid
    unifac: UnifacModel | None = None
    warnings: list[str] = field(default_factory=list)
    boiling_point_k: np.ndarray | None = None

    #: Rows the UNIFAC model covers (None = all); the others take gamma = 1.
    unifac_rows: np.ndarray | None = None

    def ln_gamma(self, x: np.ndarray, t_k: float) -> np.ndarray:
        if self.unifac is None:
            return np.zeros_like(x)
        if self.unifac_rows is None:
            return self.unifac.ln_gamma(x, t_k)
        out = np.zeros_like(x)
        out[self.unifac_rows] = self.unifac.ln_gamma(x[self.unifac_rows], t_k)
        return out

    def ln_gamma_of(self, x: np.ndarray):
        """ln γ of liquid ``x`` as a function of temperature (same numbers as
        :meth:`ln_gamma`; the composition-only parts computed once)."""
        x = np.asarray(x, float)
        if self.unifac is None:
            zeros = np.zeros_like(x)
            return lambda t_k: zeros
        if self.unifac_rows is None:
            return self.unifac.at_composition(x)
        rows = self.unifac_rows
        part = self.unifac.at_composition(x[rows])

        def ln_gamma_at(t_k: float) -> np.ndarray:
            out = np.zeros_like(x)
            out[rows] = part(t_k)
            return out

        return ln_gamma_at


def mixture_from_composition(composition: pd.DataFrame, library, activity: str = "unifac"
                             ) -> Mixture:
    """Build a :class:`Mixture` from a composition table (rows merged by ``model_component``).

    Parameters
    ----------
    composition : DataFrame
        The composition table (DEVELOPERS.md): ``model_component`` and ``mol_pct`` are used.
    library : Library
        ``components`` (``molar_mass_g_mol``, ``density_15c_kg_m3``), ``psat_kpa(t_k)`` and
        ``unifac_groups``.
    activity : {"unifac", "ideal"}

    Raises
    ------
    SettingsError
        Unknown ``activity``.
    LibraryError
        A model component is not in the library or lacks a molar mass, density or vapour
        pressure.
    """
    if activity not in ("unifac", "ideal"):
        raise SettingsError(f"[volatility] activity = {activity!r}; use \"unifac\" or \"ideal\"")
    for col in ("model_component", "mol_pct"):
        if col not in composition.columns:
            raise LibraryError(f"composition table: column {col!r} missing (quantify stage)")
    moles = composition.groupby("model_component", sort=True)["mol_pct"].sum()
    moles = moles[moles > 0]
    names = [str(n) for n in moles.index]
    comps = library.components
    absent = [n for n in names if n not in comps.index]
    if absent:
        raise LibraryError(f"library: model component(s) {', '.join(absent[:5])} not in "
                           "components.csv; check the composition's model_component column")
    sub = comps.loc[names]
    mm = sub["molar_mass_g_mol"].to_numpy(float)
    rho = sub["density_15c_kg_m3"].to_numpy(float)
    grid, grid_names = library_psat_grid(library)
    pos = grid_names.get_indexer(names)
    finite = grid.finite_rows
    bad = [n for n, m, r, p in zip(names, mm, rho, pos)
           if not (m > 0 and r > 0) or p < 0 or not finite[p]]
    if bad:
        raise LibraryError(f"library: {', '.join(bad[:5])} lack(s) a molar mass, density at "
                           "15 °C or vapour-pressure correlation needed for volatility")
    warnings: list[str] = []
    model = None
    rows = None
    z = moles.to_numpy(float)
    if activity == "unifac":
        groups_all = library.unifac_groups
        groups = [groups_all.get(n) or {} for n in names]
        has = np.array([bool(g) for g in groups])
        share = float(z[~has].sum() / z.sum() * 100)
        no_groups = [n for n, h in zip(names, has) if not h]
        if share > MAX_NO_GROUPS_MOL_PCT or not has.any():
            warnings.append("volatility: no UNIFAC groups for " + ", ".join(no_groups[:5])
                            + f" ({share:.2f} mol %); ideal solution (gamma = 1) used for all")
        else:
            if no_groups:
                warnings.append("volatility: no UNIFAC groups for " + ", ".join(no_groups[:5])
                                + f" ({share:.2f} mol %); gamma = 1 for them")
                rows = np.flatnonzero(has)
            model = build_model([g for g, h in zip(groups, has) if h],
                                parameters_from_library(library),
                                [n for n, h in zip(names, has) if h])
            if model.missing_pairs:
                warnings.append("volatility: UNIFAC interaction parameters missing for "
                                f"main-group pairs {list(model.missing_pairs)}; taken as 0")
    tb = (sub["boiling_point_c"].to_numpy(float) + 273.15 if "boiling_point_c" in sub.columns
          else None)
    # M [g/mol] / rho [kg/m3] = 1e-3 m3/mol
    return Mixture(names, z / z.sum(), mm / rho * 1e-3, grid.take(pos), model, warnings, tb,
                   rows)


# -- phase calculations -------------------------------------------------------------------------

@dataclass(frozen=True)
class FlashResult:
    """Isothermal flash at a fixed vapour/liquid volume ratio.

    p_kpa : total pressure [kPa]; vapour_mol_frac : vapour share of the moles [-];
    x, y : liquid and vapour mole fractions [-]; iterations : solver iterations.
    """

    p_kpa: float
    vapour_mol_frac: float
    x: np.ndarray
    y: np.ndarray
    iterations: int


def bubble_pressure_kpa(mixture: Mixture, x: np.ndarray, t_k: float) -> float:
    """Bubble-point pressure Σ x_i γ_i P^sat_i [kPa] of liquid ``x`` at ``t_k`` [K]."""
    x = np.asarray(x, float)
    return float(np.sum(x * np.exp(mixture.ln_gamma(x, t_k) + mixture.psat.ln_psat(t_k))))


def flash_volume_ratio(mixture: Mixture, t_k: float = T_DVPE_K, vl_ratio: float = VL_RATIO,
                       tol: float = 1e-12, max_iter: int = 200) -> FlashResult:
    r"""Isothermal flash in a closed chamber with V_vapour = ``vl_ratio`` · V_liquid.

    Notes
    -----
    Unknowns P, vapour mole share β and liquid x; successive substitution of

    .. math:: P = \sum_i x_i\gamma_i P^{sat}_i,\quad K_i = \gamma_i P^{sat}_i/P,\quad
              \frac{\beta}{1-\beta} = \frac{r\,v_L(x)\,P}{RT},\quad
              x_i = \frac{z_i}{1 + \beta(K_i - 1)}

    (v_L the liquid molar volume, r the volume ratio). β is about 1 % for petrol, so the
    iteration contracts fast. For a pure component P = P^sat exactly.
    """
    z = mixture.z
    ln_ps = mixture.psat.ln_psat(t_k)
    x = z.copy()
    p = beta = 0.0
    k = np.ones_like(z)
    for it in range(1, max_iter + 1):
        gp = np.exp(mixture.ln_gamma(x, t_k) + ln_ps)
        p = float(np.sum(x * gp))
        k = gp / p
        vl = float(x @ mixture.molar_volume_m3_mol)
        c = vl_ratio * vl * p * 1e3 / (R_J_MOL_K * t_k)
        beta = c / (1.0 + c)
        x_new = z / (1.0 + beta * (k - 1.0))
        x_new /= x_new.sum()
        if np.max(np.abs(x_new - x)) < tol:
            x = x_new
            break
        x = x_new
    return FlashResult(p, beta, x, k * x, it)


def total_vapour_pressure_kpa(mixture: Mixture, t_k: float = T_DVPE_K,
                              vl_ratio: float = VL_RATIO) -> float:
    """Total pressure [kPa] of the liquid at ``t_k`` [K] in a chamber with vapour/liquid
    volume ratio ``vl_ratio`` (0 gives the bubble-point pressure)."""
    if vl_ratio == 0:
        return bubble_pressure_kpa(mixture, mixture.z, t_k)
    return flash_volume_ratio(mixture, t_k, vl_ratio).p_kpa


def vapour_pressure_kpa(composition: pd.DataFrame, library, t_k: float = T_DVPE_K,
                       vl_ratio: float = VL_RATIO, activity: str = "unifac") -> float:
    """Total vapour pressure [kPa] of a composition table at ``t_k`` [K] and vapour/liquid
    volume ratio ``vl_ratio`` (0: bubble-point pressure); see :func:`flash_volume_ratio`."""
    mix = mixture_from_composition(composition, library, activity)
    return total_vapour_pressure_kpa(mix, t_k, vl_ratio)


#: DVPE range of EN 13016-1 (2018 and later editions, scope) [kPa]
DVPE_RANGE_KPA = (15.5, 106.0)


def dvpe_kpa_from_total(p_tot_kpa: float) -> float:
    """DVPE [kPa] from the total pressure at 37.8 °C and V/L = 4 (ASTM D5191).

    .. math:: DVPE = 0.965\\,P_{tot} - 3.78

    >>> round(dvpe_kpa_from_total(65.0), 3)
    58.945
    """
    return 0.965 * p_tot_kpa - 3.78


def rvp_psi(dvpe_kpa: float) -> float:
    """DVPE expressed in psi (1 psi = 6.894757 kPa).

    >>> round(rvp_psi(68.94757), 4)
    10.0
    """
    return dvpe_kpa / KPA_PER_PSI


def vapour_lock_index(dvpe_kpa: float, e70_vol_pct: float) -> float:
    """Vapour lock index VLI = 10·DVPE [kPa] + 7·E70 [% v/v] (EN 228:2012+A1:2017).

    >>> vapour_lock_index(60.0, 30.0)
    810.0
    """
    return 10.0 * dvpe_kpa + 7.0 * e70_vol_pct


def bubble_temperature_k(mixture: Mixture, x: np.ndarray, p_kpa: float = P_ATM_KPA,
                         t_guess_k: float = 350.0, tol: float = 1e-9) -> float:
    """Bubble-point temperature [K] of liquid ``x`` at ``p_kpa``.

    Solves ln Σ x_i γ_i P^sat_i(T) = ln P in 1/T (see :func:`_bubble_point`).
    """
    return _bubble_point(mixture, np.asarray(x, float), p_kpa, t_guess_k, tol)[0]


def _bubble_point(mixture: Mixture, x: np.ndarray, p_kpa: float, t_guess_k: float,
                  tol: float = 1e-9, slope_ratio: float = 1.0
                  ) -> tuple[float, np.ndarray, float]:
    """(bubble temperature [K], ln K_i = ln γ_i + ln P^sat_i − ln P there, slope ratio) of
    liquid ``x``.

    f(u) = ln Σ x_i γ_i P^sat_i − ln P with u = 1/T is close to linear in u. The first step
    from ``t_guess_k`` is a Newton step with the slope Σ y_i d ln P^sat_i/du times
    ``slope_ratio`` (the activity coefficients' share of the slope, as the last solve of a
    distillation saw it; 1 = left out); then a safeguarded secant to |f| < ``tol``. The
    returned ratio is the last secant slope over the P^sat-only slope, for the next solve.
    From the previous point of a distillation this takes 2–3 evaluations of γ.
    """
    ln_p = np.log(p_kpa)
    ln_gamma = mixture.ln_gamma_of(x)
    psat = mixture.psat
    lx = np.log(np.where(x > 0, x, 1.0))
    live = x > 0

    def f(u):
        t = 1.0 / u
        lk = ln_gamma(t) + psat.ln_psat(t) - ln_p
        return _log_sum(lx, lk, live), lk

    u0 = 1.0 / t_guess_k
    t0 = t_guess_k
    lg = ln_gamma(t0)
    lps, slope = psat.ln_psat_slope(t0)
    lk0 = lg + lps - ln_p
    f0 = _log_sum(lx, lk0, live)
    if abs(f0) < tol:
        return t0, lk0, slope_ratio
    y = np.exp(np.where(live, lx + lk0 - f0, -np.inf))
    d = float(y @ slope)                          # d f / d u, negative
    ok = np.isfinite(d) and d < 0
    u1 = u0 - f0 / (d * slope_ratio) if ok else 1.0 / (t_guess_k + 2.0)
    u1 = min(max(u1, 1.0 / 1500.0), 1.0 / 100.0)
    f1, lk1 = f(u1)
    u_low = u_high = None               # root lies in (u_low, u_high); f falls as u rises
    for u, fu in ((u0, f0), (u1, f1)):
        if fu > 0:
            u_low = u if u_low is None else max(u_low, u)
        else:
            u_high = u if u_high is None else min(u_high, u)
    first = True
    for _ in range(100):
        if abs(f1) < tol:
            if first:                   # converged by the Newton step: keep the ratio
                return 1.0 / u1, lk1, slope_ratio
            ratio = (f1 - f0) / (u1 - u0) / d if ok and u1 != u0 else 1.0
            return 1.0 / u1, lk1, (ratio if 0.5 < ratio < 2.0 else 1.0)
        first = False
        u2 = u1 - f1 * (u1 - u0) / (f1 - f0) if f1 != f0 else u1 * 1.001
        if u_low is not None and u_high is not None and not u_low < u2 < u_high:
            u2 = 0.5 * (u_low + u_high)
        u2 = min(max(u2, 1.0 / 1500.0), 1.0 / 100.0)
        u0, f0 = u1, f1
        u1 = u2
        f1, lk1 = f(u1)
        if f1 > 0:
            u_low = u1 if u_low is None else max(u_low, u1)
        else:
            u_high = u1 if u_high is None else min(u_high, u1)
    log.warning("bubble temperature did not converge (residual %.2e)", f1)
    return 1.0 / u1, lk1, 1.0


def _log_sum(lx: np.ndarray, lk: np.ndarray, live: np.ndarray) -> float:
    """ln Σ_i x_i K_i over the rows with x_i > 0 (``lx`` = ln x_i there)."""
    return float(np.log(np.sum(np.exp(lx[live] + lk[live]))))


def _step_rayleigh(n: np.ndarray, k: np.ndarray, vm: np.ndarray, v_goal: float) -> np.ndarray:
    """Remove vapour from liquid moles ``n`` with equilibrium ratios ``k`` held constant until
    the liquid volume is ``v_goal``: n_i -> n_i·s^{K_i} (the exact Rayleigh solution for
    constant K), s found by Newton on the volume (convex, increasing in ln s)."""
    w = vm * n
    u = 0.0
    for _ in range(60):
        e = np.exp(k * u)
        g = float(w @ e) - v_goal
        if abs(g) <= 1e-13 * v_goal:
            break
        u -= g / float((w * k) @ e)
    return n * np.exp(k * u)


def rayleigh_distillation(mixture: Mixture, p_kpa: float = P_ATM_KPA,
                          step_vol_pct: float = 2.0, predictor: str = "newton") -> pd.DataFrame:
    r"""Differential (Rayleigh) batch distillation of the mixture at ``p_kpa``.

    Returns
    -------
    DataFrame with ``evaporated_vol_pct`` (liquid volume at 15 °C distilled, % of the
    charge) and ``t_k`` (bubble temperature of the liquid left, [K]); first row 0 %.

    Notes
    -----
    Rayleigh: dn_i = y_i dN with y_i = K_i x_i and K_i = γ_i P^sat_i/P at the bubble point.
    Over one step K is taken at the step's midpoint (predictor–corrector: a first step with
    the K of the start, then the step again with the mean of ln K at start and predicted end),
    and n_i ∝ s^{K_i} solves dn_i/n_i = K_i dN/N exactly for constant K.
    """
    vm = mixture.molar_volume_m3_mol
    n = mixture.z.copy()
    v0 = float(n @ vm)

    x = n / n.sum()
    t, lk0, ratio = _bubble_point(mixture, x, p_kpa, 350.0)
    targets = np.unique(np.concatenate([np.arange(step_vol_pct, 95.0, step_vol_pct),
                                        TAIL_VOL_PCT]))
    pct = [0.0]
    temps = [t]
    slope_t = 0.0                       # dT/d(% evaporated) of the last step [K]
    for target in targets:
        # lk0: ln K of the liquid at its bubble point (from the last solve)
        v_goal = v0 * (1.0 - target / 100.0)
        n_pred = _step_rayleigh(n, np.exp(lk0), vm, v_goal)
        x_pred = n_pred / n_pred.sum()
        t_guess = t + slope_t * (target - pct[-1])
        if predictor == "newton" and len(pct) > 1:
            t_pred, lk1 = _newton_bubble_point(mixture, x_pred, p_kpa, t_guess)
        else:
            t_pred, lk1, ratio = _bubble_point(mixture, x_pred, p_kpa, t_guess,
                                               slope_ratio=ratio)
        n = _step_rayleigh(n, np.exp(0.5 * (lk0 + lk1)), vm, v_goal)
        x = n / n.sum()
        t_new, lk0, ratio = _bubble_point(mixture, x, p_kpa, t_pred, STEP_TOL, ratio)
        slope_t = (t_new - t) / (target - pct[-1])
        t = t_new
        pct.append(float(target))
        temps.append(t)
    return pd.DataFrame({"evaporated_vol_pct": pct, "t_k": temps})


def _newton_bubble_point(mixture: Mixture, x: np.ndarray, p_kpa: float, t_guess_k: float
                         ) -> tuple[float, np.ndarray]:
    """One Newton step of :func:`_bubble_point` from ``t_guess_k``: (T, ln K at T) with γ
    kept at ``t_guess_k`` (one evaluation of γ). For the predictor of a distillation step,
    whose guess is extrapolated from the last steps (within about 0.1 K)."""
    ln_p = np.log(p_kpa)
    lg = mixture.ln_gamma_of(x)(t_guess_k)
    lps, slope = mixture.psat.ln_psat_slope(t_guess_k)
    live = x > 0
    lx = np.log(np.where(live, x, 1.0))
    lk = lg + lps - ln_p
    f0 = _log_sum(lx, lk, live)
    y = np.exp(np.where(live, lx + lk - f0, -np.inf))
    d = float(y @ slope)
    if not (np.isfinite(d) and d < 0):
        return _bubble_point(mixture, x, p_kpa, t_guess_k)[:2]
    t = 1.0 / min(max(1.0 / t_guess_k - f0 / d, 1.0 / 1500.0), 1.0 / 100.0)
    return t, lg + mixture.psat.ln_psat(t) - ln_p


def tbp_to_d86_k(evaporated_vol_pct, t_tbp_k) -> np.ndarray:
    r"""Convert a TBP(-like) curve to D86-like temperatures [K] (Riazi–Daubert 1986, K set).

    At 0/10/30/50/70/90/95 % evaporated, T_D86 = a·T_TBP^b with the kelvin coefficients of
    :data:`RIAZI_DAUBERT_TBP_TO_D86_K`; in between, the shift T_D86 − T_TBP is interpolated
    linearly in volume % and added to the curve (held constant beyond 95 %). The result is
    made non-decreasing by a running minimum from the end.

    >>> round(float(tbp_to_d86_k([50.0], [373.15])[0]), 2)   # 1.10755·373.15^0.98270
    373.04
    """
    pct = np.asarray(evaporated_vol_pct, float)
    t = np.asarray(t_tbp_k, float)
    nodes, a, b = RIAZI_DAUBERT_TBP_TO_D86_K.T
    order = np.argsort(pct, kind="stable")
    t_nodes = np.interp(nodes, pct[order], t[order])
    shift_nodes = a * t_nodes ** b - t_nodes
    d86 = t + np.interp(pct, nodes, shift_nodes)
    if len(d86) and np.all(np.diff(pct) >= 0):
        # made non-decreasing from the back (running minimum): the point-by-point conversion
        # can put a front point above later ones (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a); the later points win.
        d86 = np.minimum.accumulate(d86[::-1])[::-1]
    return d86


def distillation_points(evaporated_vol_pct, t_c) -> dict[str, float]:
    """E70, E100, E150 [% v/v] and T10, T50, T90, FBP [°C] from a D86-like curve."""
    pct = np.asarray(evaporated_vol_pct, float)
    t = np.maximum.accumulate(np.asarray(t_c, float))
    out = {}
    for key, temp in (("e70_vol_pct", 70.0), ("e100_vol_pct", 100.0), ("e150_vol_pct", 150.0)):
        out[key] = float(np.interp(temp, t, pct, left=0.0, right=100.0))
    for key, p in (("t10_c", 10.0), ("t50_c", 50.0), ("t90_c", 90.0),
                   ("fbp_c", FBP_EVAPORATED_PCT)):
        out[key] = float(np.interp(p, pct, t))
    return out


# -- the property model ---------------------------------------------------------------------------

def _unidentified_psat_spread_kpa(composition: pd.DataFrame, library) -> float:
    """Standard uncertainty [kPa] of Σ x_i P^sat_i from unidentified rows: each row's P^sat
    at 37.8 °C taken as uniform over the range of the library's components of its carbon
    number (range/√12), added linearly over the rows (judgement, no source)."""
    if "group" not in composition.columns or "carbon_number" not in composition.columns:
        return 0.0
    unid = composition[composition["group"] == "unidentified"]
    if unid.empty:
        return 0.0
    ranges = _psat_ranges(library)
    total = 0.0
    for n, mol_pct in zip(unid["carbon_number"].tolist(), unid["mol_pct"].tolist()):
        spread = ranges.get(n)
        if spread is not None:
            total += mol_pct / 100.0 * spread / np.sqrt(12.0)
    return float(total)


#: {carbon number: P^sat range [kPa]} per library components table.
_PSAT_RANGES = ObjectMemo()


def _psat_ranges(library) -> dict:
    """Range (max - min) of P^sat at 37.8 °C over the library's components of each carbon
    number (None when fewer than two), computed once per library table."""
    return _PSAT_RANGES.get(library.components, lambda: _build_psat_ranges(library))


def _build_psat_ranges(library) -> dict:
    comps = library.components
    ps = library.psat_kpa(T_DVPE_K)
    cn = comps["carbon_number"].reindex(ps.index)
    table = {}
    for n in pd.unique(cn.dropna()):
        values = ps[(cn == n).to_numpy()].dropna()
        table[n] = float(values.max() - values.min()) if len(values) >= 2 else None
    return table


def boiling_order_curve(mixture: Mixture, evaporated_vol_pct) -> np.ndarray:
    """A TBP curve [K] of a perfect fractionation: components in order of normal boiling
    point, each taking its share of the liquid volume at 15 °C (ideal, no azeotropes).

    The temperature at a volume % is interpolated between the mid-points of the components'
    volume slices.
    """
    if mixture.boiling_point_k is None or not np.isfinite(mixture.boiling_point_k).all():
        raise LibraryError("library: boiling_point_c missing for a component; the "
                           "boiling-order curve needs every normal boiling point")
    order = np.argsort(mixture.boiling_point_k, kind="stable")
    vol = (mixture.z * mixture.molar_volume_m3_mol)[order]
    share = vol / vol.sum() * 100.0
    mid = np.cumsum(share) - share / 2.0
    return np.interp(np.asarray(evaporated_vol_pct, float), mid, mixture.boiling_point_k[order])


#: Allowed values of the ``[volatility] distillation_curve`` setting.
DISTILLATION_CURVES = ("equilibrium", "riazi-daubert", "boiling-order")


def distillation_curve_c(mixture: Mixture, kind: str = "equilibrium",
                         p_kpa: float = P_ATM_KPA, step_vol_pct: float = 2.0) -> pd.DataFrame:
    """The D86-like distillation estimate [°C] against volume % evaporated.

    Parameters
    ----------
    kind : {"equilibrium", "riazi-daubert", "boiling-order"}
        ``equilibrium``: the Rayleigh distillation's bubble temperature as it is (an
        equilibrium still, as a D86 flask roughly is). ``riazi-daubert``: that curve taken as
        TBP-like and converted by :func:`tbp_to_d86_k`. ``boiling-order``: the ideal
        boiling-point-ordered TBP (:func:`boiling_order_curve`) converted by
        :func:`tbp_to_d86_k` (no activity model, so no ethanol effect).

    Returns
    -------
    DataFrame with ``evaporated_vol_pct``, ``t_c`` and, except for ``boiling-order``, the
    unconverted Rayleigh temperature ``t_equilibrium_c``.
    """
    if kind not in DISTILLATION_CURVES:
        raise SettingsError(f"[volatility] distillation_curve = {kind!r}; use one of "
                            f"{', '.join(DISTILLATION_CURVES)}")
    if kind == "boiling-order":
        pct = np.concatenate([np.arange(0.0, 95.0, step_vol_pct), TAIL_VOL_PCT])
        t_k = tbp_to_d86_k(pct, boiling_order_curve(mixture, pct))
        return pd.DataFrame({"evaporated_vol_pct": pct, "t_c": t_k - 273.15})
    curve = rayleigh_distillation(mixture, p_kpa, step_vol_pct)
    pct = curve["evaporated_vol_pct"].to_numpy()
    t_eq = curve["t_k"].to_numpy()
    t_k = tbp_to_d86_k(pct, t_eq) if kind == "riazi-daubert" else t_eq
    return pd.DataFrame({"evaporated_vol_pct": pct, "t_c": t_k - 273.15,
                         "t_equilibrium_c": t_eq - 273.15})


def compute(composition: pd.DataFrame, library, settings: dict) -> PropertyResult:
    """DVPE, RVP, VLI and the distillation estimate of a composition table.

    Parameters
    ----------
    composition : DataFrame
        Composition table (``model_component``, ``mol_pct``; ``group``, ``carbon_number`` for
        the unidentified-share uncertainty).
    library : Library
    settings : dict
        Run settings; reads the ``[volatility]`` section (``activity``,
        ``distillation_curve``, ``distillation_step_vol_pct``).

    Returns
    -------
    PropertyResult with ``dvpe_kpa``, ``e70_vol_pct``, ``e100_vol_pct``, ``e150_vol_pct``,
    ``t10_c``, ``t50_c``, ``t90_c``, ``fbp_c`` and their standard uncertainties; details hold
    ``rvp_psi``, ``vli``, ``total_pressure_kpa``, the bubble pressure, the curve and the model.

    Notes
    -----
    Uncertainty of the distillation temperatures: the Riazi–Daubert average error of 5 °C
    (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a) combined with the difference, at that point, between the chosen curve and
    the other common route (the boiling-order TBP converted by Riazi–Daubert; when
    that is the chosen curve, the equilibrium curve). E values take the temperature
    uncertainty through the curve's slope. FBP adds :data:`U_FBP_RULE_C` for its rule.
    """
    cfg = dict(settings.get("volatility", {})) if settings else {}
    activity = cfg.get("activity", "unifac")
    kind = cfg.get("distillation_curve", "equilibrium")
    step = float(cfg.get("distillation_step_vol_pct", 2.0))
    if not 0.1 <= step <= 5.0:
        raise SettingsError(f"[volatility] distillation_step_vol_pct = {step}; use 0.1 to 5")
    result = PropertyResult()
    mix = mixture_from_composition(composition, library, activity)
    result.warnings.extend(mix.warnings)
    activity_used = "unifac" if mix.unifac is not None else "ideal"

    flash = flash_volume_ratio(mix, T_DVPE_K, VL_RATIO)
    dvpe = dvpe_kpa_from_total(flash.p_kpa)
    u_p = np.hypot(U_PTOT_REL * flash.p_kpa, _unidentified_psat_spread_kpa(composition, library))
    result.values["dvpe_kpa"] = dvpe
    result.uncertainty["dvpe_kpa"] = float(0.965 * u_p)
    if not DVPE_RANGE_KPA[0] <= dvpe <= DVPE_RANGE_KPA[1]:
        result.warnings.append(
            f"volatility: calculated DVPE {dvpe:.1f} kPa lies outside the range of the standard "
            f"test ({DVPE_RANGE_KPA[0]:g}-{DVPE_RANGE_KPA[1]:g} kPa, EN 13016-1); check the "
            "identification and the composition before using it")

    curve = distillation_curve_c(mix, kind, P_ATM_KPA, step)
    pct = curve["evaporated_vol_pct"].to_numpy()
    t_c = curve["t_c"].to_numpy()
    points = distillation_points(pct, t_c)
    result.values.update(points)
    other_kind = "equilibrium" if kind == "boiling-order" else "boiling-order"
    try:
        other = distillation_curve_c(mix, other_kind, P_ATM_KPA, step)
        t_other = np.interp(pct, other["evaporated_vol_pct"], other["t_c"])
    except LibraryError:
        t_other = t_c
        result.warnings.append("volatility: no boiling points for the distillation "
                               "uncertainty; only the Riazi–Daubert 5 °C is counted")
    u_t = np.hypot(U_RIAZI_DAUBERT_C, t_c - t_other)
    for key, p in (("t10_c", 10.0), ("t50_c", 50.0), ("t90_c", 90.0)):
        result.uncertainty[key] = float(np.interp(p, pct, u_t))
    result.uncertainty["fbp_c"] = float(np.hypot(np.interp(FBP_EVAPORATED_PCT, pct, u_t),
                                                 U_FBP_RULE_C))
    t_mono = np.maximum.accumulate(t_c)
    for key, temp in (("e70_vol_pct", 70.0), ("e100_vol_pct", 100.0), ("e150_vol_pct", 150.0)):
        u_here = float(np.interp(temp, t_mono, u_t))
        below = float(np.interp(temp - u_here, t_mono, pct, left=0.0, right=100.0))
        above = float(np.interp(temp + u_here, t_mono, pct, left=0.0, right=100.0))
        result.uncertainty[key] = 0.5 * (above - below)

    e70 = points["e70_vol_pct"]
    # extra property keys (beyond the dha-result/1 schema's), shown in the reports and checkable in specs
    result.values["rvp_psi"] = rvp_psi(dvpe)
    result.uncertainty["rvp_psi"] = rvp_psi(result.uncertainty["dvpe_kpa"])
    if e70 is not None and np.isfinite(e70):
        result.values["vli"] = vapour_lock_index(dvpe, e70)
        u_e70 = result.uncertainty.get("e70_vol_pct")
        result.uncertainty["vli"] = (float(np.hypot(10.0 * result.uncertainty["dvpe_kpa"], 7.0 * u_e70))
                                     if u_e70 is not None else None)
    result.details.update({
        "model": {"activity": activity_used, "psat": "library correlations",
                  "dvpe": "flash at 37.8 °C, V/L = 4, DVPE = 0.965·P_tot − 3.78 kPa (ASTM D5191)",
                  "distillation": {"equilibrium": "Rayleigh batch distillation at 101.325 kPa",
                                   "riazi-daubert": "Rayleigh batch distillation, converted by "
                                   "Riazi–Daubert (1986) TBP→D86, kelvin coefficients",
                                   "boiling-order": "boiling-point-ordered TBP converted by "
                                   "Riazi–Daubert (1986) TBP→D86, kelvin coefficients"}[kind],
                  "fbp_rule": f"temperature at {FBP_EVAPORATED_PCT} % evaporated"},
        "total_pressure_kpa": flash.p_kpa,
        "bubble_pressure_kpa_37_8c": bubble_pressure_kpa(mix, mix.z, T_DVPE_K),
        "vapour_mol_frac_at_vl4": flash.vapour_mol_frac,
        "rvp_psi": rvp_psi(dvpe),
        "vli": vapour_lock_index(dvpe, e70),
        "initial_boiling_point_c": float(t_c[0]),
        "curve": curve.to_dict(orient="list"),
        "uncertainty_basis": {
            "dvpe_kpa": "4 % of P_tot: half the original-vs-Dortmund UNIFAC spread "
                        "(original vs Dortmund UNIFAC flash with thermo 0.6.1), plus the unidentified share; not "
                        "validated against measured DVPE",
            "distillation": "Riazi–Daubert average error 5 °C (Riazi & Daubert 1986; Wauquier vol. 1 Table 4.16a) combined with "
                            f"the difference from the {other_kind} curve; E values through the "
                            "curve; FBP rule +10 °C (judgement)",
        },
    })
    return result
