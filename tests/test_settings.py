"""Settings: defaults, overlay, and refusal of typos."""
import pytest

from dha.errors import SettingsError
from dha.settings import load_settings


def test_defaults_load():
    s = load_settings()
    assert s["quantify"]["reference_temperature_c"] == 15.0


def test_overlay_changes_one_key(tmp_path):
    f = tmp_path / "run.toml"
    f.write_text("[quantify]\nreference_temperature_c = 15.56\n")
    s = load_settings(f)
    assert s["quantify"]["reference_temperature_c"] == 15.56
    assert s["identify"]["ri_tolerance"] == load_settings()["identify"]["ri_tolerance"]


@pytest.mark.parametrize("text", [
    "[quantfy]\nx = 1\n",                      # unknown section
    "[quantify]\nreference_temp = 15\n",       # unknown key
    "[quantify]\nreference_temperature_c = 'warm'\n",  # wrong type
    "[quantify\n",                             # not TOML
])
def test_bad_settings_rejected(tmp_path, text):
    f = tmp_path / "bad.toml"
    f.write_text(text)
    with pytest.raises(SettingsError):
        load_settings(f)
