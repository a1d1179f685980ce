r"""Why a petrol has its octane number: contributions of its components, cells and classes.

Method (blending-value decomposition along the composition simplex)
-------------------------------------------------------------------
Let ``F(x)`` be the octane number (RON or MON) the default model gives for volume fractions
``x`` (summing to 1), with the lab calibration applied when one is set, exactly as
``dha.properties.octane.compute`` does. For every row *i* of the composition table

.. math:: D_i = \frac{d}{dh} F\Big(\frac{x + h\,e_i}{1 + h}\Big)\Big|_{h=0},\qquad
          b_i = F + D_i - \sum_j x_j D_j

``D_i`` is the derivative of the octane number when a little more of component *i* is added
to the sample (the rest diluted in proportion); ``b_i`` is the component's *blending value*
in this sample (the value it would need in a linear-by-volume model to give the same local
response). ``Σ_j x_j D_j`` is zero for an exact derivative (adding "more of the sample itself"
changes nothing); subtracting its numerical value makes ``Σ_i x_i b_i = F`` exact, to
rounding, whatever the model. The contribution of row *i* is ``c_i = x_i b_i`` [octane
number]; cells (group × carbon number) and classes are sums of rows, so they add up to F.

The *pull* of a row, ``p_i = x_i (b_i - F) = x_i (D_i - Σ x_j D_j)``, is to first order the
change of the sample's octane number when that row is taken out and the rest renormalised
(with the sign reversed): a negative pull holds the number down. The ten components with the
most negative pull on RON are "the components that pull the number down most"; structural
classes (n-paraffins by chain length, isoparaffins by number of branches, naphthenes,
olefins, aromatics, oxygenates, unidentified) are summed the same way.

Why this and not Shapley or leave-one-out: with several hundred components an exact Shapley
split needs exponentially many model calls (and a sampled one is noisy); leave-one-out
contributions do not add up to the predicted value for a non-linear model. The blending-value
split is the local (first-order) attribution that is exact in sum, needs one model call per
row, and for a linear-by-volume model gives exactly ``x_i ON_i``. The derivative is taken by a
forward difference with step ``STEP`` in one batched model call when the model exposes its
vectorised ``blend``; otherwise ``predict_inputs`` is called once per row.

A calibration applied after the model (``[octane] calibration``) is part of ``F``, so the
contributions add up to the calibrated ``properties.ron``/``mon``; any residual left between
``F`` and the reported value (only rounding, normally) is spread over the rows by volume and
reported as ``residual``.
"""
from __future__ import annotations

import logging
from functools import lru_cache
from typing import Any

import numpy as np
import pandas as pd

from dha.groups import carbon_bucket
from dha.properties import octane

log = logging.getLogger("dha.explain")

PROPS = ("ron", "mon")
#: Forward-difference step on the volume fraction [-].
STEP = 1e-6
#: Number of components listed as pulling the octane number down most.
N_COMPONENTS = 10
#: Largest block (rows x components) of one vectorised model call; bigger matrices are cut
#: into row blocks of this size (cache-sized temporaries: faster, same numbers).
CHUNK_ELEMENTS = 1 << 16
#: Use the model's vectorised ``blend`` when it reproduces ``predict_inputs`` (False: always
#: call ``predict_inputs`` once per row; slower, same numbers).
BATCHED = True
METHOD = ("blending-value decomposition along the composition simplex: b_i = ON + D_i - "
          "sum_j x_j D_j with D_i the derivative of ON when component i is added (rest "
          "diluted); contribution = x_i b_i (sums to ON); pull = x_i (b_i - ON), negative "
          "holds the number down")

CLASS_ORDER = ("n-paraffins", "isoparaffins", "naphthenes", "olefins", "aromatics",
               "oxygenates", "unidentified")


# --------------------------------------------------------------------------------------------
# The model as a function of volume fractions
# --------------------------------------------------------------------------------------------

def _model_name(settings: dict) -> str:
    return (settings or {}).get("octane", {}).get("model", "interaction")


def _calibration(settings: dict) -> dict | None:
    path = (settings or {}).get("octane", {}).get("calibration", "") or ""
    return octane.load_calibration(path, _model_name(settings)) if path else None


def _group_fracs(inputs: pd.DataFrame, x: np.ndarray) -> list[dict[str, float]]:
    """Volume fractions of the calibration's groups for each row of ``x``."""
    groups = inputs["group"].astype(str).to_numpy()
    names = octane.CALIBRATION_TERMS["groups"][1:]
    tot = x.sum(axis=1)
    cols = {g: x[:, groups == g].sum(axis=1) / tot for g in names}
    return [{g: float(cols[g][k]) for g in names} for k in range(x.shape[0])]


_WARNED: set[str] = set()


def _warn_once(message: str) -> None:
    if message not in _WARNED:
        _WARNED.add(message)
        log.warning(message)


def _batched(inputs: pd.DataFrame, x: np.ndarray, model: str, params) -> dict[str, np.ndarray]:
    """The octane module's own vectorised prediction (``octane.predict_many``) on every row of
    ``x`` at once (checked against ``predict_inputs`` by the caller)."""
    out = octane.predict_many(inputs, x, model, params)
    return {p: np.asarray(out[p], dtype=float).reshape(-1) for p in PROPS}


def _batched_chunks(inputs: pd.DataFrame, x: np.ndarray, model: str, params
                    ) -> dict[str, np.ndarray]:
    """:func:`_batched` over blocks of at most ``CHUNK_ELEMENTS`` matrix elements.

    Same numbers as one call (every row is computed on its own); a block small enough to stay
    in the processor cache is several times faster than one (n+1) x n matrix: for 500
    components 27 ms instead of 80 ms (benchmarks/bench_explain.py)."""
    rows = max(1, CHUNK_ELEMENTS // max(x.shape[1], 1))
    if x.shape[0] <= rows:
        return _batched(inputs, x, model, params)
    parts = [_batched(inputs, x[a:a + rows], model, params) for a in range(0, x.shape[0], rows)]
    return {p: np.concatenate([part[p] for part in parts]) for p in PROPS}


def predict_matrix(inputs: pd.DataFrame, x: np.ndarray, settings: dict) -> dict[str, np.ndarray]:
    """Octane numbers for many volume-fraction vectors (rows of ``x``) of the same components.

    Uses ``octane.predict_many`` (all rows in one vectorised call) when it reproduces
    ``octane.predict_inputs`` (the model interface) on the first row, else ``predict_inputs``
    row by row. A lab calibration from the settings is applied to every row.
    """
    x = np.atleast_2d(np.asarray(x, dtype=float))
    model = _model_name(settings)
    params = octane.load_params()
    out: dict[str, np.ndarray] | None = None
    if BATCHED:
        try:
            out = _batched_chunks(inputs, x, model, params)
            check = octane.predict_inputs(inputs.assign(vol_frac=x[0]), model, params)
            if any(abs(float(check[p]) - out[p][0]) > 1e-9 for p in PROPS):
                _warn_once("octane contributions: the vectorised model call differs from "
                           "predict_inputs; calling predict_inputs per row (slower)")
                out = None
        except Exception:  # noqa: BLE001 - a different model: fall back to the interface
            _warn_once("octane contributions: no vectorised model call; calling "
                       "predict_inputs per row (slower)")
            out = None
    if out is None:
        rows = [octane.predict_inputs(inputs.assign(vol_frac=xr), model, params) for xr in x]
        out = {p: np.array([float(r[p]) for r in rows]) for p in PROPS}
    cal = _calibration(settings)
    if cal:
        gv = _group_fracs(inputs, x) if cal["kind"] == "groups" else [None] * len(x)
        for p in PROPS:
            entry = cal.get("properties", {}).get(p)
            if entry:
                out[p] = np.array([octane.apply_calibration(float(v), entry, cal["kind"], g)
                                   for v, g in zip(out[p], gv)])
    return out


def merge_identical(inputs: pd.DataFrame) -> tuple[pd.DataFrame, np.ndarray]:
    """(one row per distinct model input with the volume fractions summed, the merged row of
    every input row).

    Rows equal in every column but ``vol_frac`` (the unidentified peaks of one carbon number,
    which the model treats as the same 2-methylalkane; a component split over two peaks) are
    one component for the model, so they share one derivative ``D_i``.

    >>> df = pd.DataFrame({"name": ["a", "b", "a"], "vol_frac": [0.2, 0.5, 0.3]})
    >>> merged, code = merge_identical(df)
    >>> merged["vol_frac"].tolist(), code.tolist()
    ([0.5, 0.5], [0, 1, 0])
    """
    cols = [inputs[c].tolist() for c in inputs.columns if c != "vol_frac"]
    seen: dict[tuple, int] = {}
    code = np.array([seen.setdefault(key, len(seen)) for key in zip(*cols)]
                    if cols else [0] * len(inputs), dtype=int)
    first = np.unique(code, return_index=True)[1]
    merged = inputs.iloc[first].reset_index(drop=True)
    merged["vol_frac"] = np.bincount(code, weights=inputs["vol_frac"].to_numpy(float),
                                     minlength=len(first))
    return merged, code


def _perturbed_rows(xm: np.ndarray, a: int, b: int) -> np.ndarray:
    """Rows ``a:b`` of the matrix [x; (x + STEP e_1)/(1 + STEP); ...; (x + STEP e_n)/(1 + STEP)],
    made block by block (the whole matrix is never held)."""
    block = np.tile(xm, (b - a, 1))
    r = np.arange(max(a, 1), b)
    block[r - a, r - 1] += STEP
    block[r - a] /= 1.0 + STEP
    return block


def _perturbed_predictions(inputs: pd.DataFrame, xm: np.ndarray, model: str, params
                           ) -> dict[str, np.ndarray]:
    """Uncalibrated RON/MON of every row of the perturbed matrix of ``xm`` (n + 1 rows), in
    blocks of at most :data:`CHUNK_ELEMENTS` elements through ``octane.predict_many``."""
    n = len(xm)
    size = max(1, CHUNK_ELEMENTS // max(n, 1))
    parts = [_batched(inputs, _perturbed_rows(xm, a, min(a + size, n + 1)), model, params)
             for a in range(0, n + 1, size)]
    return {p: np.concatenate([part[p] for part in parts]) for p in PROPS}


def _calibrate_perturbed(inputs: pd.DataFrame, xm: np.ndarray, pred: dict[str, np.ndarray],
                         settings: dict) -> dict[str, np.ndarray]:
    """The lab calibration of the settings applied to every row of the perturbed matrix."""
    cal = _calibration(settings)
    if not cal:
        return pred
    n = len(xm)
    gv: list = [None] * (n + 1)
    if cal["kind"] == "groups":
        groups = inputs["group"].astype(str).to_numpy()
        names = octane.CALIBRATION_TERMS["groups"][1:]
        total = xm.sum()
        tot = np.concatenate([[total], np.full(n, (total + STEP) / (1.0 + STEP))])
        cols = {}
        for g in names:
            part = xm[groups == g].sum()
            cols[g] = np.concatenate([[part], (part + STEP * (groups == g)) / (1.0 + STEP)]) / tot
        gv = [{g: float(cols[g][k]) for g in names} for k in range(n + 1)]
    out = dict(pred)
    for p in PROPS:
        entry = cal.get("properties", {}).get(p)
        if entry:
            out[p] = np.array([octane.apply_calibration(float(v), entry, cal["kind"], g)
                               for v, g in zip(pred[p], gv)])
    return out


def blending_values(inputs: pd.DataFrame, settings: dict) -> tuple[dict[str, float],
                                                                    dict[str, np.ndarray]]:
    """(ON of the sample, blending value b_i of every row) for RON and MON (see module notes).

    The derivatives are taken once per distinct model input (:func:`merge_identical`) in
    vectorised blocks (``octane.predict_many``). The model's value for the merged rows must
    equal ``octane.predict_inputs`` (the model interface) on the rows as given, to 1e-9;
    otherwise the rows are not merged, and if the vectorised call still differs (or does not
    exist) ``predict_inputs`` is called once per row.
    """
    x = inputs["vol_frac"].to_numpy(float)
    x = x / x.sum()
    model, params = _model_name(settings), octane.load_params()
    pred = None
    merged, code = inputs, np.arange(len(inputs))
    if BATCHED:
        try:
            ref = octane.predict_inputs(inputs.assign(vol_frac=x), model, params)
            candidates = [merge_identical(inputs)]
            if len(candidates[0][0]) < len(inputs):
                candidates.append((inputs, np.arange(len(inputs))))
            for merged, code in candidates:
                xm = np.bincount(code, weights=x, minlength=len(merged))
                pred = _perturbed_predictions(merged, xm, model, params)
                if all(abs(float(ref[p]) - pred[p][0]) <= 1e-9 for p in PROPS):
                    break
                pred = None
            if pred is None:
                _warn_once("octane contributions: the vectorised model call differs from "
                           "predict_inputs; calling predict_inputs per row (slower)")
        except Exception:  # noqa: BLE001 - a different model: fall back to the interface
            _warn_once("octane contributions: no vectorised model call; calling "
                       "predict_inputs per row (slower)")
            pred = None
    if pred is None:
        merged, code = inputs, np.arange(len(inputs))
        rows = _perturbed_rows(x, 0, len(x) + 1)
        per_row = [octane.predict_inputs(inputs.assign(vol_frac=xr), model, params)
                   for xr in rows]
        pred = {p: np.array([float(r[p]) for r in per_row]) for p in PROPS}
    xm = np.bincount(code, weights=x, minlength=len(merged))
    pred = _calibrate_perturbed(merged, xm, pred, settings)
    on = {p: float(pred[p][0]) for p in PROPS}
    b = {}
    for p in PROPS:
        d = ((pred[p][1:] - pred[p][0]) / STEP)[code]
        b[p] = on[p] + d - float(x @ d)
    return on, b


# --------------------------------------------------------------------------------------------
# Classes
# --------------------------------------------------------------------------------------------

def structural_class(group: str, carbon_number: Any, smiles: Any) -> str:
    """Structural class of a row for the explanation.

    >>> structural_class("n_paraffins", 5, "CCCCC")
    'n-paraffin C5'
    >>> structural_class("isoparaffins", 8, "CC(C)CC(C)(C)C")
    'isoparaffins, tri-branched or more'
    >>> structural_class("aromatics", 7, "Cc1ccccc1")
    'aromatics'
    """
    g = str(group)
    if g == "n_paraffins":
        return f"n-paraffin C{int(carbon_number)}" if pd.notna(carbon_number) else "n-paraffins"
    if g == "isoparaffins":
        branches = 1
        if isinstance(smiles, str) and smiles:
            st = octane.parse_smiles(smiles)
            branches = max(st.n_ch3 - 2, 1)
        label = {1: "mono-branched", 2: "di-branched"}.get(branches, "tri-branched or more")
        return f"isoparaffins, {label}"
    return g if g in CLASS_ORDER else "unidentified"


@lru_cache(maxsize=4096)
def _class_of(group: str, carbon_number: int | None, smiles: str | None) -> str:
    return structural_class(group, carbon_number if carbon_number is not None else np.nan,
                            smiles)


def _structural_class(group: str, carbon_number: Any, smiles: Any) -> str:
    """:func:`structural_class`, cached on hashable arguments (NaN -> None)."""
    cn = int(carbon_number) if pd.notna(carbon_number) else None
    return _class_of(str(group), cn, smiles if isinstance(smiles, str) else None)


def _sums(code: np.ndarray, n: int, *columns: np.ndarray) -> list[np.ndarray]:
    """Sum of each column per code 0..n-1 (the rows of one name, cell or class)."""
    return [np.bincount(code, weights=np.asarray(c, dtype=float), minlength=n)
            for c in columns]


def _class_key(label: str) -> tuple:
    for i, base in enumerate(("n-paraffin", "isoparaffins", "naphthenes", "olefins",
                              "aromatics", "oxygenates", "unidentified")):
        if label.startswith(base):
            tail = label[len(base):]
            num = int(tail.strip().lstrip("C")) if base == "n-paraffin" and tail.strip() else 0
            order = {"": 0, ", mono-branched": 1, ", di-branched": 2,
                     ", tri-branched or more": 3}.get(tail, num)
            return (i, order)
    return (99, 0)


# --------------------------------------------------------------------------------------------
# The result keys
# --------------------------------------------------------------------------------------------

def empty_keys(reason: str | None = None) -> dict[str, Any]:
    """The two result keys when there is no octane number to explain."""
    return {"octane_contributions": [],
            "octane_explained": {"method": METHOD, "components": [], "classes": [],
                                 "note": reason}}


def explain(composition: pd.DataFrame, library, settings: dict,
            properties: dict[str, Any] | None = None) -> dict[str, Any]:
    """``octane_contributions`` and ``octane_explained`` of a composition table.

    Parameters
    ----------
    composition : composition table (DEVELOPERS.md): ``vol_pct``, ``group``,
        ``carbon_number``, ``name``, ``model_component``
    library : ``dha.library.Library``
    settings : full settings (``[octane] model`` and ``calibration``)
    properties : the result's ``properties``; its ``ron``/``mon`` are the totals the
        contributions must add up to (default: the model's own value)

    Returns
    -------
    dict with ``octane_contributions`` (list of {group, carbon_number, ron, mon, vol_pct},
    sums = RON/MON) and ``octane_explained`` ({method, components, classes, residual}).
    """
    properties = properties or {}
    if any(properties.get(p, 0) is None for p in PROPS):
        return empty_keys("no octane number in this result")
    if composition is None or len(composition) == 0:
        return empty_keys("empty composition")
    comp = composition[composition["vol_pct"].fillna(0) > 0].reset_index(drop=True)
    if comp.empty:
        return empty_keys("empty composition")
    inputs = octane.model_inputs(comp, library.components)
    on, b = blending_values(inputs, settings)
    x = inputs["vol_frac"].to_numpy(float)
    x = x / x.sum()
    contrib, pull, residual = {}, {}, {}
    for p in PROPS:
        target = properties.get(p)
        target = on[p] if target is None else float(target)
        residual[p] = target - on[p]
        contrib[p] = x * b[p] + residual[p] * x
        pull[p] = x * (b[p] - on[p])
        if abs(residual[p]) > 0.005:
            log.warning("octane contributions: model gives %s %.4f, result says %.4f; the "
                        "difference is spread by volume", p.upper(), on[p], target)
    comps = library.components
    smiles = comp["model_component"].map(comps["smiles"])
    names = comp["name"].astype(str).to_numpy()
    groups = comp["group"].astype(str).to_numpy()
    carbon = comp["carbon_number"].tolist()
    buckets = [carbon_bucket(c) if pd.notna(c) else "13+" for c in carbon]
    klass = [_structural_class(g, c, s) for g, c, s in zip(groups, carbon, smiles.tolist())]
    vol = 100.0 * x
    cells = []
    bucket_rank = {bk: i for i, bk in enumerate((3, 4, 5, 6, 7, 8, 9, 10, 11, 12, "13+"))}
    cell_code, cell_keys = pd.factorize(pd.Series(list(zip(groups, buckets))), sort=False)
    cell_sum = _sums(cell_code, len(cell_keys), contrib["ron"], contrib["mon"], vol)
    for k, (g, bk) in enumerate(cell_keys):
        cells.append({"group": g, "carbon_number": bk,
                      "ron": float(cell_sum[0][k]), "mon": float(cell_sum[1][k]),
                      "vol_pct": float(cell_sum[2][k])})
    group_rank = {g: i for i, g in enumerate(("n_paraffins", "isoparaffins", "olefins",
                                              "naphthenes", "aromatics", "oxygenates",
                                              "unidentified"))}
    cells.sort(key=lambda c: (group_rank.get(c["group"], 99), bucket_rank.get(c["carbon_number"],
                                                                               99)))
    name_code, name_keys = pd.factorize(names, sort=False)
    n_vol, n_ron, n_mon, n_ron_b, n_mon_b = _sums(name_code, len(name_keys), vol, pull["ron"],
                                                  pull["mon"], b["ron"] * x, b["mon"] * x)
    neg = np.flatnonzero(n_ron < 0)
    worst = neg[np.lexsort((n_mon[neg], n_ron[neg]))][:N_COMPONENTS]
    components = [{"name": str(name_keys[k]), "vol_pct": float(n_vol[k]),
                   "ron": float(n_ron[k]), "mon": float(n_mon[k]),
                   "ron_blending_value": float(n_ron_b[k] / n_vol[k] * 100.0),
                   "mon_blending_value": float(n_mon_b[k] / n_vol[k] * 100.0)}
                  for k in worst]
    class_code, class_keys = pd.factorize(np.asarray(klass, dtype=object), sort=False)
    c_sum = _sums(class_code, len(class_keys), vol, pull["ron"], pull["mon"], contrib["ron"],
                  contrib["mon"])
    order = sorted(range(len(class_keys)), key=lambda k: _class_key(class_keys[k]))
    classes = [{"class": str(class_keys[k]), "vol_pct": float(c_sum[0][k]),
                "ron": float(c_sum[1][k]), "mon": float(c_sum[2][k]),
                "ron_contribution": float(c_sum[3][k]),
                "mon_contribution": float(c_sum[4][k])} for k in order]
    return {"octane_contributions": cells,
            "octane_explained": {
                "method": METHOD,
                "components": components,
                "classes": classes,
                "note": ("components/classes: ron and mon are the pull, x_i (b_i - ON): the "
                         "first-order change of the sample's number if that part were taken "
                         "out, sign reversed (negative = holds the number down); "
                         "*_contribution and octane_contributions add up to RON/MON"),
                "residual": residual,
            }}


def result_keys(composition, library, settings: dict, properties: dict) -> dict[str, Any]:
    """As :func:`explain`, but never raises: a failure gives empty keys with the reason."""
    try:
        return explain(composition, library, settings, properties)
    except Exception as err:  # noqa: BLE001 - an explanation must not lose the run
        log.warning("octane contributions failed", exc_info=True)
        return empty_keys(f"not computed ({type(err).__name__}: {err})")
