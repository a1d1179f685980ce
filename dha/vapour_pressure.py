"""Pure-component vapour pressure from the library's correlations.

The table is shaped like ``component_library/vapour_pressure.csv``: one row per component with
``equation`` (``antoine``, ``dippr101`` or ``wagner25``), coefficients ``a`` … ``e``, ``tc_k``,
``pc_kpa``, the validity range ``tmin_k`` … ``tmax_k`` and ``source``.
"""
from __future__ import annotations

import logging

import numpy as np
import pandas as pd

from dha.errors import LibraryError

log = logging.getLogger("dha.vapour_pressure")

#: The three equation forms (T in K). Documentation only: :func:`psat_kpa` implements them.
EQUATIONS = {
    "antoine": "log10(P/kPa) = a - b/(T + c)",
    "dippr101": "ln(P/Pa) = a + b/T + c*ln(T) + d*T**e",
    "wagner25": "ln(P/Pc) = (Tc/T)*(a*tau + b*tau**1.5 + c*tau**2.5 + d*tau**5), tau = 1 - T/Tc, Pc in kPa",
}

_REQUIRED = ("equation", "a", "b", "c")


def psat_kpa(table: pd.DataFrame, t_k: float | np.ndarray) -> np.ndarray:
    """Vapour pressure of every row of a correlation table.

    Parameters
    ----------
    table : DataFrame
        Rows shaped like ``vapour_pressure.csv`` (columns ``equation``, ``a`` … ``e``, ``tc_k``,
        ``pc_kpa``; blanks as NaN).
    t_k : float or ndarray
        Temperature [K]: a scalar (same for all rows) or an array broadcastable against the rows
        (one temperature per row).

    Returns
    -------
    ndarray
        Vapour pressure [kPa], one value per row (NaN never appears for a valid table).

    Raises
    ------
    LibraryError
        If an ``equation`` is not one of :data:`EQUATIONS` or a needed coefficient is missing.

    Notes
    -----
    ``antoine``: log10(P/kPa) = a − b/(T + c).
    ``dippr101``: ln(P/Pa) = a + b/T + c·ln T + d·T^e (DIPPR equation 101, Perry's 8th ed. Table 2-8).
    ``wagner25``: ln(P/Pc) = (Tc/T)(aτ + bτ^1.5 + cτ^2.5 + dτ^5), τ = 1 − T/Tc (Wagner 2.5-5 form,
    Poling et al., *The Properties of Gases and Liquids*, 5th ed., eq. 7-3.3).
    The validity range is not enforced here; the library check verifies that 310.93 K lies in it.

    Examples
    --------
    Toluene, Antoine constants of Poling et al. 5th ed. (log10 Pa, A = 9.07954, B = 1344.8,
    C = −53.67, converted to kPa by subtracting 3 from A), at 37.8 °C:

    >>> row = pd.DataFrame({"equation": ["antoine"], "a": [6.07954], "b": [1344.8], "c": [-53.67]})
    >>> round(float(psat_kpa(row, 310.92777777777775)[0]), 2)
    7.12
    """
    for col in _REQUIRED:
        if col not in table.columns:
            raise LibraryError(f"vapour-pressure table: column '{col}' missing; use the columns of "
                               "component_library/vapour_pressure.csv")
    n = len(table)
    t = np.broadcast_to(np.asarray(t_k, dtype=float), (n,)).astype(float)
    eq = table["equation"].astype(str).str.strip().str.lower().to_numpy()
    unknown = sorted(set(eq) - set(EQUATIONS))
    if unknown:
        raise LibraryError(f"vapour-pressure table: unknown equation {unknown}; allowed {sorted(EQUATIONS)}")

    def col(name: str) -> np.ndarray:
        if name not in table.columns:
            return np.full(n, np.nan)
        return pd.to_numeric(table[name], errors="coerce").to_numpy(dtype=float)

    a, b, c, d, e = (col(x) for x in "abcde")
    tc, pc = col("tc_k"), col("pc_kpa")
    out = np.full(n, np.nan)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        m = eq == "antoine"
        out[m] = 10.0 ** (a[m] - b[m] / (t[m] + c[m]))
        m = eq == "dippr101"
        out[m] = np.exp(a[m] + b[m] / t[m] + c[m] * np.log(t[m]) + d[m] * t[m] ** e[m]) / 1e3
        m = eq == "wagner25"
        tau = 1.0 - t[m] / tc[m]
        out[m] = pc[m] * np.exp(tc[m] / t[m] * (a[m] * tau + b[m] * tau ** 1.5
                                                + c[m] * tau ** 2.5 + d[m] * tau ** 5))
    bad = ~np.isfinite(out)
    if bad.any():
        names = table["name"].to_numpy()[bad] if "name" in table.columns else np.flatnonzero(bad)
        raise LibraryError(f"vapour-pressure table: no finite value for {list(names)[:5]} at the given "
                           "temperature; check their coefficients (missing d/e, tc_k or pc_kpa?)")
    return out
