"""Calculated properties: one module per property family.

Every property module exposes one function with the same shape::

    compute(composition: pd.DataFrame, library: Library, settings: dict) -> PropertyResult

``composition`` is the composition table of DEVELOPERS.md (one row per component or
unidentified peak, with ``mass_pct``, ``vol_pct``, ``mol_pct`` and ``model_component``).
The pipeline calls every module named in ``MODELS`` in order and merges their values into the
result's ``properties``, ``uncertainty`` and ``warnings``. A value that cannot be computed is
``None`` with the reason in ``warnings``; never a made-up number.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

#: Property keys of the result (the dha-result/1 schema); a key no model fills is null with a warning.
PROPERTY_KEYS = (
    "ron", "mon", "aki", "sensitivity", "dvpe_kpa", "density_kg_m3",
    "e70_vol_pct", "e100_vol_pct", "e150_vol_pct", "t10_c", "t50_c", "t90_c", "fbp_c",
    "net_heat_mj_kg", "mean_molar_mass_g_mol", "h_to_c_molar",
)

#: Modules whose ``compute`` the pipeline runs, in this order. A module is added here only
#: when its ``compute`` is real and tested.
MODELS: tuple[str, ...] = ("dha.properties.bulk", "dha.properties.volatility",
                           "dha.properties.octane")


@dataclass
class PropertyResult:
    """What a property module returns.

    values : property key -> value (unit in the key name) or None
    uncertainty : property key -> one standard uncertainty in the same unit, or None
    warnings : human-readable strings, one per problem
    details : free-form extra information for the reports (model name, curves, shares)
    """

    values: dict[str, float | None] = field(default_factory=dict)
    uncertainty: dict[str, float | None] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    details: dict[str, Any] = field(default_factory=dict)
