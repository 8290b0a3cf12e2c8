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


@pytest.mark.parametrize("key, value", [
    ("candidates", "../shared/candidates.csv"),
    ("measured_potentials", "/etc/passwd"),
    ("measured_rates", "inputs/../../rates.csv"),
    ("cycling", "inputs/linked"),  # a link inside the campaign that points out of it
])
def test_an_input_path_outside_the_campaign_is_refused(tmp_path, key, value):
    camp = tmp_path / "camp"
    (camp / "inputs").mkdir(parents=True)
    (tmp_path / "shared").mkdir()
    (camp / "inputs" / "linked").symlink_to(tmp_path / "shared")
    (camp / "campaign.toml").write_text(f'[inputs]\n{key} = "{value}"\n')
    # common practice, no source: a settings file must not reach files its folder does not hold
    with pytest.raises(SettingsError, match=rf"\[inputs\] {key} = '{value}' resolves to .*outside the campaign "
                                            r"folder.*read_outside_campaign = true"):
        load_campaign(camp)
    (camp / "campaign.toml").write_text(f'[inputs]\n{key} = "{value}"\nread_outside_campaign = true\n')
    assert load_campaign(camp).inputs.read_outside_campaign  # the user said so: allowed


def test_library_output_outside_the_campaign_is_refused_even_with_the_opt_in(tmp_path):
    from redoxfront.candidates.library import library_for_campaign

    camp = tmp_path / "camp"
    camp.mkdir()
    (camp / "campaign.toml").write_text(
        '[inputs]\nread_outside_campaign = true\n'
        '[library]\nscaffold = "COc1ccc([*:1])cc1"\noutput = "../x.csv"\n[library.substituents]\n1 = ["C"]\n')
    with pytest.raises(SettingsError, match=r"\[library\] output = '../x.csv' resolves to .*outside the campaign"):
        library_for_campaign(load_campaign(camp), progress=False)
    assert not (tmp_path / "x.csv").exists()


def test_writes_do_not_follow_a_linked_results_folder(tmp_path):
    from click.testing import CliRunner

    from redoxfront.cli import main

    camp = tmp_path / "camp"
    camp.mkdir()
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (camp / "campaign.toml").write_text("")
    (camp / "results").symlink_to(elsewhere)
    (elsewhere / "descriptors.csv").write_text("id,status\na,ok\n")
    r = CliRunner().invoke(main, ["report", str(camp)])
    assert r.exit_code == 2 and "outside the campaign folder" in r.output and "remove the link" in r.output
    assert sorted(p.name for p in elsewhere.iterdir()) == ["descriptors.csv"]  # nothing written there
    (camp / "results").unlink()
    (camp / "results" / "figures").parent.mkdir()
    (camp / "results" / "figures").symlink_to(elsewhere)
    from redoxfront.errors import DataError
    from redoxfront.outputs import write_text

    with pytest.raises(DataError, match="is a link to .*remove the link"):
        write_text(camp / "results" / "figures" / "front.svg", "<svg/>")
    assert sorted(p.name for p in elsewhere.iterdir()) == ["descriptors.csv"]
