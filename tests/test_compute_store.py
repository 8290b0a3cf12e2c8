"""The store names a state by what it is: one molecule in several roles, and old stores."""

import json
import sqlite3

import pytest

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings, ConformerSettings
from redoxfront.candidates.structures import candidate_states, parse_candidate
from redoxfront.compute.candidate import compute_candidate
from redoxfront.compute.step import compute_candidates
from redoxfront.compute.store import SCHEMA_VERSION, Store
from redoxfront.errors import RedoxfrontError

SETTINGS = ComputeSettings(conformers=ConformerSettings(n_generate=2, refine_lowest=1), workers=1)
DMB = "COc1ccc(OC)cc1"  # 1,4-dimethoxybenzene: reduced as an anolyte row, oxidised as a catholyte row
FC = C.potential_uncalibrated("fc")


def _cand(cid: str, role: str, row: int = 2, smiles: str = DMB):
    return parse_candidate({"id": cid, "smiles": smiles, "role": role}, row, SETTINGS)


def _alone(cand, tmp_path, name):
    out, _ = compute_candidates([cand], SETTINGS, tmp_path / f"{name}.sqlite", workers=1, progress=False)
    return out[0].row


def test_one_molecule_in_both_roles_and_twice_in_one_role_gets_what_each_row_gets_alone(tmp_path):
    rows = [_cand("A", "anolyte", 2), _cand("B", "catholyte", 3), _cand("C", "catholyte", 4),
            _cand("D", "anolyte", 5)]
    together, _ = compute_candidates(rows, SETTINGS, tmp_path / "shared.sqlite", workers=1, progress=False)
    alone = {c.id: _alone(c, tmp_path, c.id) for c in rows}
    for out in together:
        cid = out.candidate.id
        assert out.row[C.STATUS] == "ok"
        for col in (FC, "charge_charged", "multiplicity_charged", "vertical_change_on_charging_ev",
                    C.REORGANISATION_ENERGY, "homo_charged_ev"):
            assert out.row[col] == pytest.approx(alone[cid][col], abs=1e-6), (cid, col)
    by_id = {o.candidate.id: o.row for o in together}
    # the radical cation of 1,4-dimethoxybenzene: about +0.7 V vs Fc+/Fc uncalibrated here;
    # measured about +0.9 V vs Fc+/Fc in MeCN (from memory: E1/2 ~ +1.3 V vs SCE), directly
    # computed potentials are off by ~0.3 V (Davis & Fry, J. Phys. Chem. A 2010, 114, 12299)
    assert by_id["B"][FC] == pytest.approx(0.71, abs=0.05)
    assert by_id["B"][FC] == by_id["C"][FC]
    assert by_id["A"][FC] == by_id["D"][FC] < -3.0  # the radical anion: far more negative
    assert by_id["B"]["charge_charged"] == 1 and by_id["A"]["charge_charged"] == -1
    # the shared neutral state, the anion, the cation, and the cation's vertical energy at the
    # neutral geometry (the neutral state was stored by the anolyte row, without it)
    with Store(tmp_path / "shared.sqlite") as s:
        names = {r[0] for r in s._con.execute("SELECT state FROM states WHERE settings_hash=?",
                                              (SETTINGS.result_hash(),))}
    assert names == {"charge=+0;unpaired=0", "charge=-1;unpaired=1", "charge=+1;unpaired=1",
                     "charge=+0;unpaired=0:vertical:charge=+1;unpaired=1"}


def _schema_one_store(path, cand, outcome) -> None:
    """A store as redoxfront wrote it before states were named by charge and spin: role names,
    vertical energies named by the role, a checkpoint and a stored failure."""
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE states (smiles TEXT NOT NULL, state TEXT NOT NULL, settings_hash TEXT NOT NULL, "
                "payload TEXT NOT NULL, created_unix REAL NOT NULL, PRIMARY KEY (smiles, state, settings_hash))")
    key = SETTINGS.result_hash()
    for st in candidate_states(cand):
        payload = outcome.payloads[st.key]
        payload = {**payload, "state": st.name, "conformers": [
            {**c, "vertical_energies_eh": {"charged" if st.name == "discharged" else "discharged": 0.0}}
            for c in payload["conformers"]]}
        con.execute("INSERT INTO states VALUES (?, ?, ?, ?, 0)", (cand.main_smiles, st.name, key, json.dumps(payload)))
    con.execute("INSERT INTO states VALUES (?, ?, ?, ?, 0)", (cand.main_smiles, "charged:conformer:0", key, "{}"))
    con.execute("INSERT INTO states VALUES (?, ?, ?, ?, 0)", ("O", "discharged", key, '{"failed": "x"}'))
    con.commit()
    con.close()


def test_a_store_of_role_named_states_is_migrated_never_read_with_the_old_meaning(tmp_path):
    # the reported failure: a store where an anolyte row left its radical anion under "charged";
    # a catholyte row of the same molecule read it as its own charged state (-14.9 V vs Fc)
    anolyte = _cand("A", "anolyte")
    fresh = compute_candidate(anolyte, SETTINGS, str(tmp_path / "fresh.sqlite"))
    old = tmp_path / "old.sqlite"
    _schema_one_store(old, anolyte, fresh)
    with Store(old) as s:
        assert s.migrated == 2  # both optimised states kept, renamed from the charge they hold
        assert s._con.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
        names = sorted(r[0] for r in s._con.execute("SELECT state FROM states"))
    # the failure and the checkpoint named no charge: dropped, computed again when needed
    assert names == ["charge=+0;unpaired=0", "charge=-1;unpaired=1"]
    catholyte = _cand("B", "catholyte")
    b = compute_candidates([catholyte], SETTINGS, old, workers=1, progress=False)[0][0].row
    assert b[FC] == pytest.approx(_alone(catholyte, tmp_path, "B")[FC], abs=1e-6)
    assert b[FC] == pytest.approx(0.71, abs=0.05)  # as above, not -14.9 V
    # the migrated anion is read back without a new optimisation; its vertical energies, named
    # by the role that computed them, were dropped and are recomputed as single points
    again = compute_candidate(anolyte, SETTINGS, str(old))
    assert 0 < again.new_engine_calls <= 2
    a = compute_candidates([anolyte], SETTINGS, old, workers=1, progress=False)[0][0].row
    assert a[FC] == pytest.approx(_alone(anolyte, tmp_path, "A")[FC], abs=1e-9)
    assert a["vertical_change_on_charging_ev"] == pytest.approx(
        _alone(anolyte, tmp_path, "A2")["vertical_change_on_charging_ev"], abs=1e-6)


def test_a_store_of_a_newer_schema_is_refused_with_the_fix(tmp_path):
    path = tmp_path / "new.sqlite"
    con = sqlite3.connect(path)
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    con.commit()
    con.close()
    with pytest.raises(RedoxfrontError, match=r"schema 3, newer than this redoxfront reads \(2\).*move the file away"):
        Store(path)
