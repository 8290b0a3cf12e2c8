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
    with pytest.raises(SettingsError, match=r"\[compute\] solvent = 'acetonitril' is not a known solvent; allowed: .*acetonitrile"):
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


def test_solvents_by_chemical_name_and_proxies_for_missing_ones():
    """Issue 11: chemical names map to the engine's ALPB keywords (which include the
    spellings 'hexandecane' and 'furane'); a solvent the engine lacks names its closest proxy."""
    # keywords as listed for the ALPB model (Ehlert et al., J. Chem. Theory Comput. 2021, 17, 4250)
    assert ComputeSettings(solvent="hexadecane").solvent == "hexandecane"
    assert ComputeSettings(solvent="Dichloromethane").solvent == "ch2cl2"
    assert ComputeSettings(solvent="1-octanol").solvent == "octanol"
    assert ComputeSettings(solvent="furan").solvent == "furane"
    assert ComputeSettings(solvent="tetrahydrofuran").result_hash() == ComputeSettings(solvent="thf").result_hash()
    c = _load({"compute": {"solvent": "N,N-dimethylformamide"}})
    assert c.compute.solvent == "dmf"
    # from memory (CRC Handbook): propylene carbonate epsilon ~64.9, water 78.4, DMSO 46.7;
    # 1,2-dimethoxyethane ~7.2, THF ~7.5
    with pytest.raises(SettingsError, match=r"'propylene carbonate'.*no parameters.*'water' \(epsilon 78.4\), 'dmso' \(epsilon 46.7\).*explicitly"):
        ComputeSettings(solvent="propylene carbonate")
    with pytest.raises(SettingsError, match=r"closest parametrised solvents by dielectric constant are 'aniline' \(epsilon 6.9\), 'thf'"):
        _load({"compute": {"solvent": "1,2-dimethoxyethane"}})
