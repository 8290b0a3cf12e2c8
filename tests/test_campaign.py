"""Campaign file validation: unknown keys and bad values name the key and what is allowed."""

from pathlib import Path

import pytest

from redoxfront.campaign import ComputeSettings, campaign_from_mapping, load_campaign
from redoxfront.errors import SettingsError


def _load(data, tmp_path=Path(".")):
    return campaign_from_mapping(data, tmp_path)


def test_defaults():
    c = _load({})
    assert c.compute.method == "GFN2-xTB"
    assert c.compute.reference == "fc"
    assert c.compute.conformers.refine_lowest == 3
    assert c.compute.max_heavy_atoms == 100


def test_unknown_key_lists_allowed_keys():
    with pytest.raises(SettingsError, match=r"\[compute\] unknown key 'solvnt'; allowed keys: .*solvent"):
        _load({"compute": {"solvnt": "water"}})


def test_bad_choice_lists_allowed_values():
    with pytest.raises(SettingsError, match=r"\[compute\] solvent = 'acetonitril' is not allowed; allowed values: .*acetonitrile"):
        _load({"compute": {"solvent": "acetonitril"}})
    with pytest.raises(SettingsError, match=r"\[compute\] n_electrons = 3 is not allowed; allowed values: 1, 2"):
        _load({"compute": {"n_electrons": 3}})
    with pytest.raises(SettingsError, match=r"\[compute\] role = 'posolyte'.*anolyte, catholyte"):
        _load({"compute": {"role": "posolyte"}})


def test_bad_types_and_bounds():
    with pytest.raises(SettingsError, match=r"\[compute\] workers: expected a whole number, got 'two'"):
        _load({"compute": {"workers": "two"}})
    with pytest.raises(SettingsError, match=r"\[compute.conformers\] refine_lowest = 0 must be >= 1"):
        _load({"compute": {"conformers": {"refine_lowest": 0}}})
    with pytest.raises(SettingsError, match="unknown section or key 'computing'"):
        _load({"computing": {}})


def test_result_hash_tracks_only_result_settings():
    base = ComputeSettings()
    assert base.result_hash() == ComputeSettings(reference="sce", workers=8).result_hash()
    assert base.result_hash() != ComputeSettings(solvent="water").result_hash()
    assert base.result_hash() != ComputeSettings(seed=1).result_hash()


def test_load_from_folder_and_bad_toml(tmp_path):
    (tmp_path / "campaign.toml").write_text('name = "x"\n[compute]\nsolvent = "dmso"\n')
    c = load_campaign(tmp_path)
    assert c.name == "x" and c.compute.solvent == "dmso"
    assert c.store_path == tmp_path / "cache.sqlite"
    (tmp_path / "campaign.toml").write_text("name = \n")
    with pytest.raises(SettingsError, match="not valid TOML"):
        load_campaign(tmp_path)
    with pytest.raises(SettingsError, match="no campaign file"):
        load_campaign(tmp_path / "missing")
