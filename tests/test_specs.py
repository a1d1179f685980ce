"""Specification profiles and verdicts."""
import pytest
from click.testing import CliRunner

from dha import specs
from dha.cli import cli
from dha.errors import SpecError


@pytest.mark.parametrize("value, limit, kind, u, expected", [
    (96.0, 95.0, "min", 0.4, "pass"),
    (95.5, 95.0, "min", 0.4, "marginal"),   # 0.5 < U = 0.8
    (94.0, 95.0, "min", 0.4, "fail"),
    (0.95, 1.0, "max", None, "pass"),
    (1.0, 1.0, "max", None, "pass"),        # on the limit conforms (no margin known)
    (1.01, 1.0, "max", None, "fail"),
])
def test_verdict(value, limit, kind, u, expected):
    # Decision rule: EN ISO 4259 idea of a guard band, here U = 2u (GUM k = 2; common practice)
    assert specs.verdict(value, limit, kind, u) == expected


def _limits(name):
    prof = specs.load_profile(name)
    return {(lim["quantity"], lim["kind"]): lim["value"] for lim in prof["limits"]}


def test_en228_e10_limits_match_checked_facts():
    # EN 228:2012+A1:2017 E10 grade, class A (Tables 1 and 3; values checked against
    # published copies of the standard and the French arrêté of 26 Jan 2009, annex II)
    lim = _limits("en228-e10-summer")
    assert lim[("ron", "min")] == 95.0 and lim[("mon", "min")] == 85.0
    assert (lim[("density_kg_m3", "min")], lim[("density_kg_m3", "max")]) == (720.0, 775.0)
    assert lim[("benzene_vol_pct", "max")] == 1.0
    assert lim[("aromatics_vol_pct", "max")] == 35.0 and lim[("olefins_vol_pct", "max")] == 18.0
    assert lim[("oxygen_mass_pct", "max")] == 3.7 and lim[("ethanol_vol_pct", "max")] == 10.0
    assert (lim[("e70_vol_pct", "min")], lim[("e70_vol_pct", "max")]) == (22.0, 50.0)
    assert (lim[("e100_vol_pct", "min")], lim[("e100_vol_pct", "max")]) == (46.0, 72.0)
    assert lim[("e150_vol_pct", "min")] == 75.0 and lim[("fbp_c", "max")] == 210.0
    assert (lim[("dvpe_kpa", "min")], lim[("dvpe_kpa", "max")]) == (45.0, 60.0)


def test_en228_e5_differs_where_the_standard_does():
    # EN 228:2012+A1:2017: E5 has O <= 2.7 % m/m, ethanol <= 5 % v/v, E100 46-71, E70 class A 20-48
    lim = _limits("en228-e5-summer")
    assert lim[("oxygen_mass_pct", "max")] == 2.7 and lim[("ethanol_vol_pct", "max")] == 5.0
    assert lim[("e100_vol_pct", "max")] == 71.0
    assert (lim[("e70_vol_pct", "min")], lim[("e70_vol_pct", "max")]) == (20.0, 48.0)


def test_us_benzene_batch_limit():
    # 40 CFR 1090.210: 1.30 % v/v maximum without credits (40 CFR 1090.210)
    assert _limits("us-benzene-batch")[("benzene_vol_pct", "max")] == 1.3


def test_check_skips_null_with_warning():
    result = {"properties": {"ron": 96.1, "mon": None}, "uncertainty": {"ron": 1.0},
              "benzene": {"vol_pct": 1.2, "mass_pct": 1.4}, "totals": {"vol_pct": {}, "mass_pct": {}},
              "oxygen_mass_pct": 3.5, "oxygenates": [], "components": []}
    checks, warnings = specs.check(result, specs.load_profile("en228-e10-summer"))
    by = {(c["property"], c["kind"]): c for c in checks}
    assert by[("ron", "min")]["verdict"] == "marginal"    # 96.1 - 95 = 1.1 <= U = 2.0
    assert by[("benzene_vol_pct", "max")]["verdict"] == "fail"
    assert by[("oxygen_mass_pct", "max")]["verdict"] == "pass"
    assert ("mon", "min") not in by
    assert any("mon" in w for w in warnings)


def test_bad_profile(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('description = "x"\n[[limit]]\nquantity = "octane"\nkind = "min"\nvalue = 1\n')
    with pytest.raises(SpecError, match="unknown quantity"):
        specs.load_profile(bad)
    with pytest.raises(SpecError, match="not found"):
        specs.load_profile("no-such-profile")


def test_spec_list_cli():
    r = CliRunner().invoke(cli, ["spec", "list"])
    assert r.exit_code == 0
    names = r.output.split("\n\n")[0].split()
    assert "en228-e10-summer" in names and "en228-e5-summer" in names
