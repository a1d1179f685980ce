"""Retention indices (dha.retention): formulas, inverse, hold-up time, alignment, learning."""
from __future__ import annotations

import math

import numpy as np
import pytest

from dha.errors import SettingsError
from dha.retention import (IndexScale, align_indices, estimate_holdup, extend_markers,
                           make_scale, parse_markers)


def test_linear_index_van_den_dool_kratz():
    # I = 100 [n + (t - t_n)/(t_n+1 - t_n)] (van den Dool & Kratz 1963; IUPAC Gold Book
    # R05360, IUPAC Gold Book R05360): a peak at 14.0 min between n-C7 (12.0) and n-C8 (16.0) -> 750
    s = IndexScale(np.array([7, 8]), np.array([12.0, 16.0]))
    assert s.index([14.0])[0] == pytest.approx(750.0)
    assert s.index([12.0, 16.0]).tolist() == pytest.approx([700.0, 800.0])


def test_non_adjacent_markers_carry_n_difference():
    # general form with markers n and N: I = 100 [n + (N - n)(t - t_n)/(t_N - t_n)]
    # (IUPAC Gold Book R05360, note on non-adjacent alkanes)
    s = IndexScale(np.array([6, 8]), np.array([10.0, 20.0]))
    assert s.index([15.0])[0] == pytest.approx(700.0)


def test_kovats_log_index_on_adjusted_times():
    # Kovats 1958 (IUPAC Gold Book R05360): I = 100 [n + (log t'x - log t'n)/(log t'N - log t'n)]
    # t_M = 1 min, n-C5 at 3 min (t' = 2), n-C6 at 5 min (t' = 4), peak at 3.8284 (t' = 2.8284)
    tm = 1.0
    s = IndexScale(np.array([5, 6]), np.array([3.0, 5.0]), isothermal_until_min=10.0,
                   holdup_time_min=tm)
    t = tm + 2.0 * math.sqrt(2.0)
    expected = 100 * (5 + (math.log(t - tm) - math.log(2)) / (math.log(4) - math.log(2)))
    assert s.index([t])[0] == pytest.approx(expected)
    assert expected == pytest.approx(550.0)


def test_bracket_straddling_the_hold_is_linear():
    s = IndexScale(np.array([5, 6]), np.array([3.0, 5.0]), isothermal_until_min=4.0,
                   holdup_time_min=1.0)
    assert s.index([4.0])[0] == pytest.approx(550.0)


@pytest.mark.parametrize("iso", [0.0, 30.0])
def test_rt_is_the_inverse_of_index(iso):
    s = make_scale({4: 5.1, 5: 7.0, 6: 12.25, 7: 23.4, 8: 34.7},
                   {"isothermal_until_min": iso, "holdup_time_min": 4.0})
    idx = np.array([410.0, 455.5, 530.2, 699.9, 780.0, 860.0])
    assert s.index(s.rt(idx)) == pytest.approx(idx, abs=1e-9)


def test_holdup_from_three_isothermal_alkanes():
    # adjusted times of n-alkanes in an isothermal run form a geometric series (Kovats: log t'
    # linear in carbon number): with t_M = 2, t' = 1, 3, 9 -> t = 3, 5, 11
    assert estimate_holdup({4: 3.0, 5: 5.0, 6: 11.0}, 20.0) == pytest.approx(2.0)


def test_extrapolated_markers_follow_the_spacing_ratio():
    ext = extend_markers({6: 10.0, 7: 20.0, 8: 29.0, 9: 37.0}, n_extra=2)
    # spacing ratio 8/9 kept: 37 + 8*(8/9), then + 8*(8/9)^2
    assert ext[10] == pytest.approx(37 + 8 * 8 / 9)
    assert ext[11] == pytest.approx(37 + 8 * 8 / 9 + 8 * (8 / 9) ** 2)


def test_markers_must_increase():
    with pytest.raises(SettingsError):
        make_scale({5: 10.0, 6: 9.0})


def test_parse_markers_from_toml_keys():
    assert parse_markers({"5": 12.3, "C6": 18}) == {5: 12.3, 6: 18.0}
    with pytest.raises(SettingsError):
        parse_markers({"five": 12.3})
    with pytest.raises(SettingsError):
        parse_markers({"5": -1.0})


def test_alignment_preserves_order_and_uses_each_entry_once():
    lib = np.array([500.0, 510.0, 520.0])
    # two peaks both nearest to 510: one-to-one, order kept -> 500/510 or 510/520, never both 510
    a, _ = align_indices(np.array([509.0, 511.0]), lib, 3.0)
    assert len(set(a[a >= 0])) == (a >= 0).sum()
    assert list(a[a >= 0]) == sorted(a[a >= 0])
    # a crossing assignment is never chosen: peaks in time order map to increasing entries
    a, _ = align_indices(np.array([511.5, 509.5, 519.0]), lib, 3.0)
    got = a[a >= 0]
    assert list(got) == sorted(got)


def test_alignment_leaves_peaks_outside_the_window():
    a, _ = align_indices(np.array([505.0]), np.array([500.0, 510.0]), 3.0)
    assert a.tolist() == [-1]


def test_alignment_interval_entry_and_prior():
    # an interval entry (co-eluting pair) matches anywhere inside it
    a, _ = align_indices(np.array([505.0]), np.array([500.0]), 1.0, lib_index_hi=np.array([510.0]))
    assert a.tolist() == [0]
    # a prior bonus can prefer a slightly farther entry
    lib = np.array([500.0, 501.0])
    assert align_indices(np.array([500.8]), lib, 3.0)[0].tolist() == [1]
    assert align_indices(np.array([500.8]), lib, 3.0,
                         lib_bonus=np.array([1.0, 0.0]))[0].tolist() == [0]



def test_alignment_score_only_gives_the_same_score():
    # the marker search asks for the score alone (one row kept): it must equal the full table's
    rng = np.random.default_rng(5)
    lib = np.sort(rng.uniform(300.0, 1300.0, 400))
    for _ in range(20):
        peaks = np.sort(rng.uniform(280.0, 1320.0, 150))
        peaks[rng.integers(0, 150, 3)] = np.nan
        kw = dict(weight=rng.uniform(0.5, 3.0, 150), lib_bonus=rng.normal(0.0, 1.0, 400))
        a, full = align_indices(peaks, lib, 3.0, **kw)
        a_only, only = align_indices(peaks, lib, 3.0, score_only=True, **kw)
        assert only == full
        assert (a_only == -1).all()


def test_marker_chains_the_same_with_the_shared_tables():
    # the chain programme keeps its tables per hold setting (s_cache): reusing them, for
    # another hold or another number of chains, gives the chains computed afresh
    from dha.retention import _chain_dp, _Lookup
    rng = np.random.default_rng(11)
    alk = 4.0 + np.array([0.4, 1.0, 2.5, 6.3, 12.0, 19.0, 25.5, 31.5, 37.0, 42.0, 46.6])
    rt = np.sort(np.concatenate([alk, rng.uniform(4.2, 48.0, 150)]))
    size = np.where(np.isin(rt, alk), 50.0, rng.lognormal(0.0, 1.0, len(rt)))
    cand = np.sort(np.argsort(-size, kind="stable")[:40])
    w = np.log1p(size / np.median(size))
    lib = np.sort(np.concatenate([100.0 * np.arange(3, 14), rng.uniform(300.0, 1300.0, 300)]))
    look = _Lookup(lib, 3.0, 200.0, 1500.0)
    carbons = list(range(3, 14))
    shared: dict = {}
    for iso, tm, n_final, geo in ((0.0, 4.0, 2, False), (12.5, 4.0, 2, False),
                                  (12.5, 3.6, 6, True), (0.0, 4.0, 6, False),
                                  (12.5, 4.0, 6, False), (19.5, 3.9, 4, True)):
        fresh = _chain_dp(rt, cand, w, look, carbons, iso, tm, n_final, geometric_check=geo)
        again = _chain_dp(rt, cand, w, look, carbons, iso, tm, n_final, geometric_check=geo,
                          s_cache=shared)
        assert fresh == again
        assert fresh and all(len(c) >= 3 for c in fresh)

# --------------------------------------------------------------------------------------------
# Issue 13: learning that carries over (dha.retention.recalibrate_neighbours)
# --------------------------------------------------------------------------------------------

def _lab_settings(**kw):
    from dha.settings import default_settings
    from dha.synthetic import lab_standard
    s = default_settings()
    s["identify"].update({"isothermal_until_min": 15.0, "holdup_time_min": 4.0,
                          "markers": lab_standard()}, **kw)
    return s


def _structured_column(lib, seed=5):
    """A simulated lab column: per group an offset smooth in boiling point (+-2.5 units scale)
    plus an independent 0.7 units per component; the n-alkanes stay at 100 n."""
    import dataclasses

    import numpy as np
    import pandas as pd
    rng = np.random.default_rng(seed)
    c = lib.components.copy()
    bp = pd.to_numeric(c["boiling_point_c"], errors="coerce").fillna(100.0)
    off = pd.Series(0.0, index=c.index)
    for g in sorted(c["group"].unique()):
        a, b = rng.normal(0.0, 2.5, 2)
        off[c["group"] == g] = a + b * np.sin((bp[c["group"] == g] - 30.0) / 60.0)
    off += rng.normal(0.0, 0.7, len(c))
    off[c["group"] == "n_paraffins"] = 0.0
    c["retention_index"] = c["retention_index"] + off
    return dataclasses.replace(lib, components=c)


def test_recalibrated_indices_are_nearer_the_column_and_recorded(tmp_path):
    # The neighbour rule (dha.retention.recalibrate_neighbours) on structured simulated columns
    # (seeds 5-7), learnt from one real fuel (FACE G, 73 components): the recalibrated indices
    # must lie nearer the column's true indices than the shipped estimates (RMS over the
    # recalibrated components). Measured: see the assert message. NOT shown: that this raises
    # the identification of a different fuel -- over 5 fuel pairs x 3 columns the mass right
    # was 0.776 with recalibration against 0.778 learnt-only (seeds 5-7; losses up to 0.35 in
    # one pair), so the rule is off by default (dha index learn --recalibrate).
    import numpy as np

    from dha.fuel_data import composition
    from dha.library import load_library
    from dha.retention import learn_indices, write_index_overlay
    from dha.synthetic import synthetic_run
    lib = load_library()
    est = lib.components["retention_index"]
    for seed in (5, 6, 7):
        true = _structured_column(lib, seed)
        rp, _ = synthetic_run(composition(lib, "KUZ-0697"), true, seed=1, names=True,
                              index_noise_sd=0.1)
        table = learn_indices([("REF", rp)], lib, _lab_settings(), recalibrate=True)
        re = table[table["index_kind"] == "recalibrated"].set_index("name")["retention_index"]
        assert len(re) > 20
        truth = true.components["retention_index"].reindex(re.index)
        rms_new = float(np.sqrt(np.mean((re - truth) ** 2)))
        rms_old = float(np.sqrt(np.mean((est.reindex(re.index) - truth) ** 2)))
        assert rms_new < rms_old, (seed, rms_new, rms_old)
    assert set(table["index_kind"]) == {"learnt", "recalibrated"}
    d = write_index_overlay(table, tmp_path / "lab", runs=["REF"])
    lab = load_library(d)
    kinds = lab.components["retention_index_source"].str.split(":").str[0]
    assert {"learnt", "recalibrated"} <= set(kinds)
    assert set(learn_indices([("REF", rp)], lib, _lab_settings())["index_kind"]) == {"learnt"}


def test_learnt_from_the_same_fuel_is_right(tmp_path):
    # Issue 13: a column whose indices differ from the estimates by N(0, 3) units fixed per
    # component; learnt from a named run of a real fuel, a later unnamed run of the same fuel
    # (alkane standard given) >= 99.5 % of the mass right. Measured 1.000 (FACE C, seeds 1/2,
    # column seed 11). Not every simulated column gets there: over column seeds 10-40 it is
    # >= 0.995 on 24 of 31 (library 2026.12.4; median 1.000, lowest 0.972). With library
    # 2026.12.3 and the identification of then: 21 of 31, lowest 0.934 (2,3,3-trimethylpentane,
    # 6 % of the fuel, co-eluting with toluene, went to a neighbour); the generator before
    # per-component draws with library 2026.12.2: 22 of 31 (lowest 0.688).
    from dha.identify import identify
    from dha.library import load_library
    from dha.retention import learn_indices, write_index_overlay
    from dha.synthetic import identification_accuracy, real_fuel_run
    lib = load_library()
    col = dict(column_sd=3.0, column_seed=11, index_noise_sd=0.1)
    rp, _ = real_fuel_run(lib, "KUZ-0589", seed=1, names=True, **col)
    d = write_index_overlay(learn_indices([("REF", rp)], lib, _lab_settings()), tmp_path / "lab")
    lab = load_library(d)
    p, tr = real_fuel_run(lib, "KUZ-0589", seed=2, **col)
    assert identification_accuracy(identify(p, lab, _lab_settings()), tr) >= 0.995


def test_several_reference_runs_merge_with_their_spread():
    from dha.library import load_library
    from dha.retention import learn_indices
    from dha.synthetic import real_fuel_run
    lib = load_library()
    runs = [(f"R{k}", real_fuel_run(lib, mid, seed=k, names=True, index_noise_sd=0.5)[0])
            for k, mid in enumerate(("KUZ-0589", "KUZ-0628"))]
    t = learn_indices(runs, lib, _lab_settings(), recalibrate=False)
    both = t[t["n_runs"] == 2]
    assert len(both) > 5 and both["retention_index_sd"].notna().all()
    # sd of two draws of N(0, 0.5): its median over many components is near 0.5 * 0.67
    assert 0.1 < both["retention_index_sd"].median() < 0.8
    assert set(t["runs"]) >= {"R0;R1", "R0", "R1"} or set(t["runs"]) >= {"R0;R1"}
