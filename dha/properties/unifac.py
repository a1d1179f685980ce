r"""Original UNIFAC activity coefficients, vectorised with NumPy.

A :class:`UnifacModel` is built once for a composition's set of components (their subgroup
counts) and then evaluated for many liquid compositions and temperatures, as a flash or a
batch distillation needs.

Parameters are read from ``component_library/unifac/`` (original UNIFAC, Fredenslund et al.
1975, as revised and extended by Hansen et al. 1991; the tables are generated from the
``thermo`` package by ``scripts/build_unifac_parameters.py``).

>>> model = build_model([{1: 2, 2: 4}, {1: 1, 14: 1, 2: 1}])   # n-hexane, ethanol
>>> gamma = model.gamma([0.9, 0.1], 310.93)
>>> [round(float(g), 3) for g in gamma]
[1.055, 7.392]
"""
from __future__ import annotations

import logging
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from dha.errors import LibraryError
from dha.memo import ObjectMemo

log = logging.getLogger("dha.unifac")

#: Folder of the shipped parameter tables.
PARAMETER_DIR = Path(__file__).resolve().parents[2] / "component_library" / "unifac"


@dataclass(frozen=True)
class UnifacParameters:
    """Original-UNIFAC parameter tables.

    subgroups : DataFrame indexed by subgroup id with ``main_group``, ``name``, ``r``, ``q``
    interactions : dict (main_i, main_j) -> a_ij [K]
    """

    subgroups: pd.DataFrame
    interactions: dict[tuple[int, int], float]


@lru_cache(maxsize=4)
def load_parameters(folder: str | Path = PARAMETER_DIR) -> UnifacParameters:
    """Read ``subgroups.csv`` and ``interactions.csv`` from ``folder`` (cached).

    Raises
    ------
    LibraryError
        A file is missing or lacks a column.
    """
    folder = Path(folder)
    tables = {}
    for name, cols in (("subgroups.csv", ["subgroup", "main_group", "name", "r", "q"]),
                       ("interactions.csv", ["main_i", "main_j", "a_ij_k"])):
        path = folder / name
        try:
            table = pd.read_csv(path)
        except FileNotFoundError:
            raise LibraryError(f"{path}: UNIFAC parameter file missing; run "
                               "scripts/build_unifac_parameters.py") from None
        missing = [c for c in cols if c not in table.columns]
        if missing:
            raise LibraryError(f"{path}: missing column(s) {', '.join(missing)}")
        tables[name] = table
    sub = tables["subgroups.csv"].set_index("subgroup")
    if sub.index.duplicated().any():
        dup = sub.index[sub.index.duplicated()].tolist()
        raise LibraryError(f"{folder / 'subgroups.csv'}: duplicated subgroup id(s) {dup}")
    inter = tables["interactions.csv"]
    interactions = {(int(i), int(j)): float(a)
                    for i, j, a in zip(inter["main_i"], inter["main_j"], inter["a_ij_k"])}
    return UnifacParameters(sub, interactions)


def parameters_from_library(library) -> UnifacParameters:
    """The UNIFAC tables a loaded :class:`dha.library.Library` carries (shipped plus overlay).

    Falls back to the shipped tables when the library object has none.
    """
    subs = getattr(library, "unifac_subgroups", None)
    inter = getattr(library, "unifac_interactions", None)
    if subs is None or inter is None or len(subs) == 0:
        return load_parameters()

    def build() -> UnifacParameters:
        table = subs if subs.index.name == "subgroup" else subs.set_index("subgroup")
        table = table.copy()
        table.index = table.index.astype(int)
        interactions = {(int(i), int(j)): float(a) for i, j, a in
                        zip(inter["main_i"], inter["main_j"], inter["a_ij_k"])}
        return UnifacParameters(table, interactions)

    return _FROM_LIBRARY.get(library, build, tag=getattr(library, "sha256", None))


_FROM_LIBRARY = ObjectMemo(size=1)


class UnifacModel:
    r"""Original UNIFAC for one fixed set of components.

    Build it with :func:`build_model`. Attributes (N components, K subgroups present):

    nu : (N, K) subgroup counts
    r, q : (N,) van der Waals volume and area of each component
    Q : (K,) subgroup areas
    a : (K, K) interaction parameters a_mn [K] between the main groups of subgroups m, n
    missing_pairs : main-group pairs with no parameter (taken as a = 0, as thermo does)

    Notes
    -----
    Combinatorial part (Fredenslund et al. 1975), written in the form that stays finite at
    x_i = 0, with V_i = r_i/Σ x_j r_j and F_i = q_i/Σ x_j q_j:

    .. math:: \ln\gamma_i^C = 1 - V_i + \ln V_i - 5 q_i\left(1 - \frac{V_i}{F_i}
              + \ln\frac{V_i}{F_i}\right)

    Residual part, Ψ_mn = exp(−a_mn/T), θ_m = Q_m X_m/Σ Q_n X_n:

    .. math:: \ln\Gamma_k = Q_k\left[1 - \ln\sum_m \theta_m\Psi_{mk}
              - \sum_m \frac{\theta_m\Psi_{km}}{\sum_n \theta_n\Psi_{nm}}\right],
              \qquad \ln\gamma_i^R = \sum_k \nu_{ki}(\ln\Gamma_k - \ln\Gamma_k^{(i)})

    where Γ_k^(i) is the same expression for pure component i.
    """

    def __init__(self, nu: np.ndarray, R: np.ndarray, Q: np.ndarray, a: np.ndarray,
                 subgroups: tuple[int, ...], missing_pairs: tuple[tuple[int, int], ...]):
        self.nu = np.asarray(nu, dtype=float)
        self.R = np.asarray(R, dtype=float)
        self.Q = np.asarray(Q, dtype=float)
        self.a = np.asarray(a, dtype=float)
        self.subgroups = subgroups
        self.missing_pairs = missing_pairs
        self.r = self.nu @ self.R
        self.q = self.nu @ self.Q
        self.n_groups = self.nu.sum(axis=1)
        # Pure-component group area fractions θ^(i): (N, K).
        area = self.nu * self.Q
        self._theta_pure = area / area.sum(axis=1, keepdims=True)
        # components with the same group make-up (isomers) share their pure ln Γ_k^(i):
        # computed once per distinct row
        self._theta_pure_unique, self._pure_row = np.unique(self._theta_pure, axis=0,
                                                            return_inverse=True)
        self._pure_row = np.asarray(self._pure_row).reshape(-1)
        self._nu_t = np.ascontiguousarray(self.nu.T)
        self._present = self.nu > 0
        self._cache_t: float | None = None
        self._cache: tuple[np.ndarray, np.ndarray] | None = None

    @property
    def n_components(self) -> int:
        return self.nu.shape[0]

    def _psi_and_pure(self, t_k: float) -> tuple[np.ndarray, np.ndarray]:
        """Ψ (K, K) and the pure-component ln Γ_k^(i) weighted by ν, summed: (N,)."""
        if self._cache_t == t_k and self._cache is not None:
            return self._cache
        psi = np.exp(-self.a / t_k)
        ln_big_gamma = self._ln_group_gamma(self._theta_pure_unique, psi)[self._pure_row]
        pure = (self.nu * ln_big_gamma).sum(axis=1)
        self._cache_t, self._cache = t_k, (psi, pure)
        return psi, pure

    def _ln_group_gamma(self, theta: np.ndarray, psi: np.ndarray) -> np.ndarray:
        """ln Γ_k for rows of group area fractions ``theta`` (M, K) -> (M, K).

        Σ_m θ_m Ψ_mk > 0 always (Ψ > 0 and the θ of a row sum to 1).
        """
        s = theta @ psi                      # s[., k] = Σ_m θ_m Ψ_mk
        return self.Q * (1.0 - np.log(s) - (theta / s) @ psi.T)

    def ln_gamma(self, x, t_k) -> np.ndarray:
        """Natural logarithms of the activity coefficients.

        Parameters
        ----------
        x : array_like, shape (N,) or (M, N)
            Liquid mole fractions [-] (need not be normalised; they are).
        t_k : float or array_like of shape (M,)
            Temperature [K].

        Returns
        -------
        ndarray of the shape of ``x``: ln γ_i [-].
        """
        x = np.asarray(x, dtype=float)
        single = x.ndim == 1
        x2 = np.atleast_2d(x)
        x2 = x2 / x2.sum(axis=1, keepdims=True)
        # Combinatorial.
        v = self.r / (x2 @ self.r)[:, None]
        f = self.q / (x2 @ self.q)[:, None]
        ln_c = 1.0 - v + np.log(v) - 5.0 * self.q * (1.0 - v / f + np.log(v / f))
        # Residual: group mole fractions of the mixture.
        groups = x2 @ self.nu                               # (M, K)
        area = groups * self.Q
        theta = area / area.sum(axis=1, keepdims=True)
        if np.ndim(t_k) == 0:
            psi, pure = self._psi_and_pure(float(t_k))
            ln_r = self._ln_group_gamma(theta, psi) @ self.nu.T - pure
        else:
            t = np.broadcast_to(np.asarray(t_k, dtype=float), (x2.shape[0],))
            ln_r = np.empty_like(x2)
            for t_value in np.unique(t):
                rows = t == t_value
                psi, pure = self._psi_and_pure(float(t_value))
                ln_r[rows] = self._ln_group_gamma(theta[rows], psi) @ self.nu.T - pure
        out = ln_c + ln_r
        return out[0] if single else out

    def at_composition(self, x) -> "Callable[[float], np.ndarray]":
        """ln γ (N,) of one liquid composition ``x`` as a function of temperature [K].

        The same numbers as :meth:`ln_gamma` (``x`` normalised); the combinatorial part and
        the mixture's group area fractions are computed once, so a bubble-point solve that
        tries several temperatures for one liquid pays only the residual part per try.
        """
        x = np.asarray(x, dtype=float)
        x = x / x.sum()
        v = self.r / float(x @ self.r)
        f = self.q / float(x @ self.q)
        ln_c = 1.0 - v + np.log(v) - 5.0 * self.q * (1.0 - v / f + np.log(v / f))
        area = (x @ self.nu) * self.Q
        theta = area / area.sum()
        nu_t = self._nu_t

        def ln_gamma_at(t_k: float) -> np.ndarray:
            psi, pure = self._psi_and_pure(float(t_k))
            s = theta @ psi
            ln_big = self.Q * (1.0 - np.log(s) - (theta / s) @ psi.T)
            return ln_c + (ln_big @ nu_t - pure)

        return ln_gamma_at

    def gamma(self, x, t_k) -> np.ndarray:
        """Activity coefficients γ_i [-]; see :meth:`ln_gamma`."""
        return np.exp(self.ln_gamma(x, t_k))


def parse_groups(text: str) -> dict[int, int]:
    """Parse the library's ``unifac_groups`` text ``"1:2 2:4"`` into {subgroup: count}.

    >>> parse_groups("1:2 2:4")
    {1: 2, 2: 4}
    """
    out: dict[int, int] = {}
    for item in str(text).split():
        sid, _, count = item.partition(":")
        try:
            out[int(sid)] = out.get(int(sid), 0) + int(count)
        except ValueError:
            raise LibraryError(f"unifac_groups: cannot read {item!r} in {text!r}; "
                               "write subgroup:count pairs separated by spaces") from None
    return out


def build_model(groups: list[dict[int, int]], parameters: UnifacParameters | None = None,
                names: list[str] | None = None) -> UnifacModel:
    """Build a :class:`UnifacModel` for components given by their subgroup counts.

    Parameters
    ----------
    groups : list of dict
        One {subgroup id: count} per component (original-UNIFAC subgroup ids).
    parameters : UnifacParameters, optional
        Defaults to the shipped tables (:func:`load_parameters`).
    names : list of str, optional
        Component names, used in error messages only.

    Raises
    ------
    LibraryError
        A component has no groups or a subgroup id is unknown.
    """
    params = parameters if parameters is not None else load_parameters()
    names = names if names is not None else [f"component {i}" for i in range(len(groups))]
    present = sorted({int(s) for g in groups for s in g})
    unknown = [s for s in present if s not in params.subgroups.index]
    if unknown:
        who = [n for n, g in zip(names, groups) if any(int(s) in unknown for s in g)]
        raise LibraryError(f"unifac_groups: unknown subgroup id(s) {unknown} "
                           f"(components: {', '.join(who[:5])}); use original-UNIFAC ids")
    col = {s: k for k, s in enumerate(present)}
    nu = np.zeros((len(groups), len(present)))
    for i, g in enumerate(groups):
        if not g:
            raise LibraryError(f"unifac_groups: {names[i]} has no UNIFAC groups")
        for s, count in g.items():
            nu[i, col[int(s)]] += count
    sub = params.subgroups.loc[present]
    main = sub["main_group"].to_numpy(dtype=int)
    a = np.zeros((len(present), len(present)))
    missing = set()
    for m in range(len(present)):
        for n in range(len(present)):
            if main[m] == main[n]:
                continue
            value = params.interactions.get((int(main[m]), int(main[n])))
            if value is None:
                missing.add((int(main[m]), int(main[n])))
            else:
                a[m, n] = value
    if missing:
        log.warning("UNIFAC: no interaction parameter for main-group pairs %s; taken as 0",
                    sorted(missing))
    return UnifacModel(nu, sub["r"].to_numpy(float), sub["q"].to_numpy(float), a,
                       tuple(present), tuple(sorted(missing)))
