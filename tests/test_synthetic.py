"""Synthetic runs (dha.synthetic): the generator's physics and bookkeeping."""
from __future__ import annotations

import numpy as np
import pytest

from dha.library import load_library
from dha.quantify import hydrocarbon_rrf
from dha.retention import IndexScale
from dha.synthetic import (EXAMPLE_KINDS, alkane_retention_times, example_composition,
                           identification_accuracy, synthetic_run)


@pytest.fixture(scope="module")
def lib():
    return load_library()


def test_alkane_times_are_kovats_geometric_in_the_hold():
    # in an isothermal hold ln k is linear in carbon number (Kovats 1958), so adjusted times
    # t' = t - t_M of consecutive n-alkanes have a constant ratio; the model's hold is 15 min
    # and t_M = 4 min
    t = alkane_retention_times()
    adj = {c: t[c] - 4.0 for c in (3, 4, 5) if t[c] < 15.0}
    r1, r2 = adj[4] / adj[3], adj[5] / adj[4]
    assert r1 == pytest.approx(r2, rel=0.01)
    assert all(t[c] < t[c + 1] for c in range(1, 15))


def test_programmed_part_spacing_slowly_shrinks():
    # under a linear temperature programme n-alkane spacings are nearly constant and shrink
    # slowly with carbon number (common practice, no source)
    t = alkane_retention_times()
    d = np.diff([t[c] for c in range(8, 14)])
    assert np.all(d > 0) and np.all(np.diff(d) < 0) and d[-1] / d[0] > 0.6


@pytest.mark.parametrize("kind", EXAMPLE_KINDS)
def test_example_compositions(lib, kind):
    comp = example_composition(kind, lib)
    assert sum(comp.values()) == pytest.approx(100.0)
    assert len(comp) >= 100
    assert set(comp) <= set(lib.components.index)
    if kind == "e10":
        assert comp["ethanol"] == pytest.approx(10.0, abs=0.5)


def test_areas_follow_the_fid_response(lib):
    # area = mass / RRF, RRF = M 0.7487 / (12.011 n_C) (FID carbon-mass response, ASTM D6730 §15): equal masses of
    # n-hexane and benzene give areas in the inverse ratio of their RRFs
    comp = {"n-hexane": 50.0, "benzene": 50.0}
    peaks, truth = synthetic_run(comp, lib, area_noise_pct=0.0, index_noise_sd=0.0)
    area = dict(zip(truth["component"], peaks.set_index("row").loc[truth["row"], "area"]))
    rrf_hex = hydrocarbon_rrf(86.175, 6)      # n-hexane C6H14, IUPAC atomic weights
    rrf_bz = hydrocarbon_rrf(78.112, 6)       # benzene C6H6
    assert area["benzene"] / area["n-hexane"] == pytest.approx(rrf_hex / rrf_bz, rel=1e-3)


def test_library_index_is_the_truth(lib):
    comp = {"n-hexane": 30.0, "n-heptane": 30.0, "toluene": 20.0, "n-octane": 20.0}
    peaks, truth = synthetic_run(comp, lib, index_noise_sd=0.0, coelute=False)
    t = dict(zip(truth["component"], truth["rt_min"]))
    scale = IndexScale(np.array([6, 7, 8]), np.array([t["n-hexane"], t["n-heptane"], t["n-octane"]]))
    assert scale.index([t["toluene"]])[0] == pytest.approx(
        lib.components.at["toluene", "retention_index"], abs=1e-6)


def test_traces_missing_and_unknowns_added(lib):
    comp = example_composition("reformate", lib)
    peaks, truth = synthetic_run(comp, lib, seed=3, missing_trace_below_pct=0.01,
                                 extra_unknowns=7, names=True)
    assert truth["row"].isna().sum() == sum(v < 0.01 for v in comp.values())
    assert truth["component"].isna().sum() == 7
    assert peaks["name"].isna().sum() == 7
    assert peaks["area_pct"].sum() == pytest.approx(100.0)
    assert list(peaks["rt_min"]) == sorted(peaks["rt_min"])
    assert list(peaks.columns) == ["row", "rt_min", "area", "height", "area_pct", "name", "cas",
                                   "retention_index", "cds_mass_pct"]


def test_accuracy_of_the_truth_itself_is_one(lib):
    comp = example_composition("alkylate", lib)
    peaks, truth = synthetic_run(comp, lib, seed=1)
    t = truth.dropna(subset=["row"])
    ident = t[["row", "component"]].copy()
    assert identification_accuracy(ident, truth) == pytest.approx(1.0)
    # a wrong component on the largest peak is counted as wrong
    big = t.sort_values("mass_pct").iloc[-1]
    ident.loc[ident["component"] == big["component"], "component"] = "nothing"
    members = (t["row"] == big["row"]).sum()
    if members == 1:
        assert identification_accuracy(ident, truth) < 1.0 - big["mass_pct"] / 100 + 1e-9
