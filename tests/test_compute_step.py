"""The compute step end to end: potentials, store, resume, concurrency, Dask, failures."""

import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from redoxfront import columns as C
from redoxfront.campaign import ComputeSettings, ConformerSettings, load_campaign
from redoxfront.candidates.structures import candidate_states, parse_candidate
from redoxfront.compute.status import compute_status
from redoxfront.compute.candidate import CONFORMER_ENTRY, compute_candidate, conformer_key
from redoxfront.compute.rows import candidate_row
from redoxfront.compute.step import candidate_task, compute_campaign, compute_candidates
from redoxfront.compute.store import Store
from redoxfront.engine.potentials import potential_v, reduction_free_energy_ev

FAST = ConformerSettings(n_generate=2, refine_lowest=1)
SMALL = ["COc1ccccc1", "Cc1ccc(C)cc1", "COc1ccc(C)cc1", "Oc1ccccc1"]


def _campaign(tmp_path: Path, smiles: list[str], extra: str = "") -> Path:
    (tmp_path / "inputs").mkdir(parents=True, exist_ok=True)
    rows = "\n".join(f"m{i},{s}" for i, s in enumerate(smiles))
    (tmp_path / "inputs" / "candidates.csv").write_text(f"id,smiles\n{rows}\n")
    (tmp_path / "campaign.toml").write_text(
        "[compute]\nrole = 'catholyte'\nworkers = 1\n"
        "[compute.conformers]\nn_generate = 2\nrefine_lowest = 1\n" + extra
    )
    return tmp_path


def test_potential_arithmetic_and_signs():
    # E = -(dG_red + shift)/F - E_abs(SHE); 4.44 V (Trasatti, Pure Appl. Chem. 1986, 58, 955);
    # Fc+/Fc = 0.241 + 0.40 V vs SHE (Bard & Faulkner; Connelly & Geiger, Chem. Rev. 1996, 96, 877)
    assert potential_v(-10.0, shift_ev=4.8455, reference="she") == pytest.approx(10.0 - 4.8455 - 4.44)
    assert potential_v(-10.0, shift_ev=4.8455, reference="fc") == pytest.approx(10.0 - 4.8455 - 4.44 - 0.641)
    assert potential_v(-10.0, shift_ev=0.0, absolute_she="isse-gennaro", reference="she") == pytest.approx(5.72)
    # a catholyte is oxidised on charging: dG_red = E(discharged) - E(charged)
    assert reduction_free_energy_ev(-1.0, -0.6, "catholyte") == pytest.approx(-0.4 * 27.211386245988)
    assert reduction_free_energy_ev(-1.0, -1.1, "anolyte") == pytest.approx(-0.1 * 27.211386245988)


HAMMETT_SIGMA_P = {
    # Hansch, Leo & Taft, Chem. Rev. 1991, 91, 165, Table I (sigma_p; values from memory)
    "": 0.00, "C": -0.17, "OC": -0.27, "N": -0.66, "Cl": 0.23, "C(F)(F)F": 0.54, "C#N": 0.66, "C=O": 0.42,
}


def test_nitrobenzene_reduction_follows_hammett_sigma_p():
    settings = ComputeSettings(role="anolyte", solvent="acetonitrile", conformers=FAST)
    sig, pot = [], []
    for sub, sigma in HAMMETT_SIGMA_P.items():
        smiles = f"O=[N+]([O-])c1ccc({sub})cc1" if sub else "O=[N+]([O-])c1ccccc1"
        cand = parse_candidate({"id": sub or "H", "smiles": smiles}, 2, settings)
        row = candidate_task(cand, settings, None, None, {}).row
        assert row[C.STATUS] == "ok" and row["multiplicity_charged"] == 2
        sig.append(sigma)
        pot.append(row[C.potential_uncalibrated("fc")])
    r = np.corrcoef(sig, pot)[0, 1]
    slope = np.polyfit(sig, pot, 1)[0]
    # substituent effects on ArNO2 reduction follow sigma_p (Hansch, Leo & Taft 1991): r >= 0.9,
    # electron-withdrawing groups (sigma_p > 0) make reduction easier (less negative potential)
    assert r >= 0.9
    assert slope > 0
    # raw potential of nitrobenzene sits within ~0.5 V of experiment, -1.65 V vs Fc in MeCN
    # (from memory: about -1.25 V vs SCE; directly computed potentials are off by ~0.3 V,
    # Davis & Fry, J. Phys. Chem. A 2010, 114, 12299)
    assert pot[0] == pytest.approx(-1.65, abs=0.5)


def test_rerun_recomputes_nothing_and_settings_change_invalidates(tmp_path):
    camp = load_campaign(_campaign(tmp_path, SMALL[:2]))
    assert compute_status(camp).pending == ["m0", "m1"]  # no store yet: everything pending
    first = compute_campaign(camp, progress=False)
    assert first.new_engine_calls > 0
    assert list(first.table[C.STATUS]) == ["ok", "ok"]
    # the cost accounting the benchmark reports: engine calls and the conformer search
    # both happen inside the task, so together they never exceed its wall time
    for out in first.outcomes:
        assert out.conformer_seconds > 0.0
        assert out.new_engine_seconds + out.conformer_seconds <= out.task_seconds
    again = compute_campaign(camp, progress=False)
    assert again.new_engine_calls == 0
    assert again.table["from_store"].all()
    assert all(o.conformer_seconds == 0.0 and o.new_engine_seconds == 0.0 for o in again.outcomes)
    cols = [C.potential_uncalibrated("fc"), "homo_discharged_ev"]
    assert np.allclose(first.table[cols].to_numpy(float), again.table[cols].to_numpy(float))
    # the reference electrode changes only the report: still nothing recomputed
    text = (tmp_path / "campaign.toml").read_text()
    (tmp_path / "campaign.toml").write_text(text.replace("workers = 1", "workers = 1\nreference = 'sce'"))
    sce = compute_campaign(load_campaign(tmp_path), progress=False)
    assert sce.new_engine_calls == 0
    # Connelly & Geiger 1996: Fc+/Fc = +0.40 V vs SCE, so the same couple reads 0.40 V higher vs SCE
    assert sce.table[C.potential_uncalibrated("sce")].to_numpy() == pytest.approx(
        first.table[C.potential_uncalibrated("fc")].to_numpy() + 0.40)
    # the solvent changes energies: everything is computed again
    (tmp_path / "campaign.toml").write_text(text.replace("workers = 1", "workers = 1\nsolvent = 'water'"))
    water = compute_campaign(load_campaign(tmp_path), progress=False)
    assert water.new_engine_calls > 0
    # ... but not the RDKit conformer search: the stored ensemble is reused, and gives the same
    # numbers as a run that embeds afresh (a store of its own)
    assert all(o.conformer_seconds == 0.0 for o in water.outcomes)
    settings = load_campaign(tmp_path).compute
    afresh, _ = compute_candidates([o.candidate for o in water.outcomes], settings,
                                   tmp_path / "fresh.sqlite", workers=1, progress=False)
    assert all(o.conformer_seconds > 0.0 for o in afresh)
    col = C.potential_uncalibrated("fc")
    assert [o.row[col] for o in afresh] == pytest.approx(list(water.table[col]), abs=1e-9)


def test_killed_run_resumes_without_recomputing(tmp_path):
    folder = _campaign(tmp_path, SMALL + ["CCOc1ccc(OCC)cc1", "COc1ccc(OC)c(C)c1C"])
    exe = Path(sys.executable).with_name("redoxfront")
    log = (tmp_path / "stderr.txt").open("w")
    proc = subprocess.Popen([str(exe), "compute", str(folder), "--quiet"],
                            stdout=subprocess.DEVNULL, stderr=log)
    store_file = folder / "cache.sqlite"
    deadline = time.time() + 120
    stored_before = 0
    while time.time() < deadline and proc.poll() is None:
        if store_file.exists():
            try:  # read-only look, so the test does not take part in the writing
                con = sqlite3.connect(f"file:{store_file}?mode=ro", uri=True, timeout=5)
                stored_before = con.execute(
                    "SELECT COUNT(*) FROM states WHERE state != ?", (CONFORMER_ENTRY,)).fetchone()[0]
                con.close()
            except sqlite3.Error:
                stored_before = 0
            if stored_before >= 3:  # at least one candidate whole and one state of the next
                break
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    log.close()
    assert proc.returncode == -signal.SIGKILL, (tmp_path / "stderr.txt").read_text()  # killed mid-run
    assert stored_before >= 3
    con = sqlite3.connect(store_file)
    states = con.execute("SELECT smiles, COUNT(*) FROM states WHERE state != ? GROUP BY smiles",
                         (CONFORMER_ENTRY,)).fetchall()
    con.close()
    finished = {smiles for smiles, n in states if n == 2}
    assert finished  # at least one candidate was whole when the run was killed
    # the status command's view of the interrupted run agrees with the store
    st = compute_status(load_campaign(folder))
    assert len(st.done) == len(finished) and not st.failed
    assert len(st.partial) == sum(n == 1 for _, n in states)
    assert len(st.done) + len(st.partial) + len(st.pending) == 6
    report = compute_campaign(load_campaign(folder), progress=False)
    assert list(report.table[C.STATUS]) == ["ok"] * 6
    for o in report.outcomes:  # finished before the kill: read back, no engine call
        assert (o.new_engine_calls == 0) == (o.candidate.main_smiles in finished)
    with Store(store_file) as s:
        assert s.count(load_campaign(folder).compute.result_hash()) == 12
        assert s.count() == 12 + 6  # and one conformer ensemble per candidate
    # nothing stored twice, nothing lost
    con = sqlite3.connect(store_file)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    con.close()


def test_two_processes_on_one_store(tmp_path):
    # two compute runs started together on one campaign: the second stops at once saying another
    # run holds the campaign (or, if the first was already done, reads everything back), so the
    # engine work is done once, not twice
    folder = _campaign(tmp_path, SMALL[:3])
    exe = Path(sys.executable).with_name("redoxfront")
    procs = [subprocess.Popen([str(exe), "compute", str(folder), "--quiet", "--out", str(folder / f"out{i}.csv")],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for i in range(2)]
    outs = [p.communicate(timeout=300) for p in procs]
    codes = sorted(p.returncode for p in procs)
    assert codes in ([0, 0], [0, 2]), outs
    calls = [int(re.search(r"(\d+) new engine calls", o).group(1)) for o, _ in outs if "new engine calls" in o]
    with Store(folder / "cache.sqlite") as s:
        assert s.count() == 6 + 3  # 3 candidates x 2 states, and 3 conformer ensembles
    if codes == [0, 2]:
        busy = next(err for (_, err), p in zip(outs, procs) if p.returncode == 2)
        assert busy.startswith("error: another compute run (") and str(folder) in busy, busy
    else:
        assert min(calls) == 0  # the later one found everything stored
    col = C.potential_uncalibrated("fc")
    single = pd.read_csv(next(folder / f"out{i}.csv" for i, p in enumerate(procs) if p.returncode == 0))
    assert list(single[C.STATUS]) == ["ok"] * 3 and single[col].notna().all()


def test_dask_local_cluster_matches_local_run(tmp_path):
    pytest.importorskip("distributed")
    settings = ComputeSettings(conformers=FAST)
    cands = [parse_candidate({"id": f"m{i}", "smiles": s}, i + 2, settings) for i, s in enumerate(SMALL[:2])]
    local, _ = compute_candidates(cands, settings, tmp_path / "a.sqlite", workers=1, progress=False)
    dask, _ = compute_candidates(cands, settings, tmp_path / "b.sqlite", workers=2, dask_address="local",
                                 progress=False)
    col = C.potential_uncalibrated("fc")
    assert [o.row[col] for o in dask] == pytest.approx([o.row[col] for o in local], abs=1e-9)
    with Store(tmp_path / "b.sqlite") as s:  # the client stored what the cluster computed
        assert s.count(settings.result_hash()) == 4
        assert s.count(conformer_key(settings)) == 2


def test_engine_failure_is_reported_and_batch_goes_on(tmp_path):
    # a lone proton has no electrons to give: the engine refuses it (written as a neutral
    # salt with a chloride counterion, so the input checks for unbalanced charges and for the
    # carrier fragment let it through)
    camp = load_campaign(_campaign(tmp_path, ["[H+].[Cl-]", SMALL[0]]))
    report = compute_campaign(camp, progress=False)
    status = list(report.table[C.STATUS])
    assert status[0].startswith("failed: discharged state: tblite GFN2-xTB failed")
    assert "number of electrons" in status[0]
    assert status[1] == "ok"
    assert compute_campaign(camp, progress=False).new_engine_calls == 0  # failures are stored too
    st = compute_status(camp)
    assert st.done == ["m1"] and list(st.failed) == ["m0"] and not st.pending and not st.partial
    assert st.failed["m0"] == status[0].removeprefix("failed: ")
    # the command names every failed candidate and why
    from click.testing import CliRunner

    from redoxfront.cli import main

    result = CliRunner().invoke(main, ["compute", str(tmp_path), "--quiet"])
    assert result.exit_code == 0
    assert "1 candidates computed, 1 failed" in result.output
    assert "geometries.sdf" in result.output  # says where the results went
    assert "failed: m0: discharged state: tblite GFN2-xTB failed" in result.output
    status_out = CliRunner().invoke(main, ["status", str(tmp_path)]).output
    assert "2 candidates: 1 done, 1 failed, 0 partly done, 0 pending; 0 input rows rejected" in status_out


def test_charged_state_starts_from_the_vertical_point_already_computed(tmp_path):
    # the vertical point of the discharged state (charged state at the discharged geometry) is
    # the first point of the charged-state optimisation: an uninterrupted run reuses it, a run
    # resumed after the discharged state computes it again, and both reach the same minimum to
    # the last bit: each point's SCC starts from the previous point of the same path only
    settings = ComputeSettings(role="catholyte", conformers=ConformerSettings(n_generate=6, refine_lowest=2))
    cand = parse_candidate({"id": "dmb", "smiles": "COc1ccc(OC)cc1"}, 2, settings)
    whole = compute_candidate(cand, settings, str(tmp_path / "a.sqlite"))
    neutral = candidate_states(cand)[0].key  # the discharged state is stored as what it is
    assert neutral == "charge=+0;unpaired=0"
    resumed = compute_candidate(cand, settings, None, {neutral: whole.payloads[neutral]})
    a = whole.states.states["charged"].conformers
    b = resumed.states.states["charged"].conformers
    assert len(a) == len(b) == 2
    for x, y in zip(a, b):
        assert x.energy_eh == y.energy_eh  # exact: the same path, however the run was split
        np.testing.assert_array_equal(x.positions_angstrom, y.positions_angstrom)
        np.testing.assert_array_equal(x.charges, y.charges)
        assert y.gradient_calls == x.gradient_calls  # the start point counts either way


def test_two_electron_couple_has_both_vertical_energies_and_a_sane_reorganisation_energy():
    # n = 2: the intermediate state carries the vertical energies of both of its neighbours, so
    # the four-point lambda of the first couple uses E(discharged at the intermediate geometry),
    # never the second couple's energy; Nelsen et al., J. Am. Chem. Soc. 1987, 109, 677: each
    # half is a relaxation energy, so the total is small and non-negative
    settings = ComputeSettings(role="anolyte", conformers=FAST)
    cand = parse_candidate({"id": "bq", "smiles": "O=C1C=CC(=O)C=C1", "n_electrons": 2}, 2, settings)
    out = candidate_task(cand, settings, None, None, {})
    mid = out.states.states["intermediate"].lowest
    assert set(mid.vertical_energies_eh) == {"discharged", "charged"}
    assert set(out.states.states["discharged"].lowest.vertical_energies_eh) == {"intermediate"}
    assert set(out.states.states["charged"].lowest.vertical_energies_eh) == {"intermediate"}
    # second reduction of a quinone is harder than the first (semiquinone, then dianion): normal
    # ordering, a fact of quinone electrochemistry in aprotic solvents (common knowledge, no
    # source). The size is overestimated: about 1.9 V here against roughly 0.7 V measured for
    # benzoquinone in MeCN/DMF (from memory); implicit solvent under-solvates the dianion
    assert out.row[C.STEP_SEPARATION] == pytest.approx(
        out.row[C.potential_uncalibrated("fc", 1)] - out.row[C.potential_uncalibrated("fc", 2)])
    assert 0.2 < out.row[C.STEP_SEPARATION] < 3.0
    lam, lam2 = out.row[C.REORGANISATION_ENERGY], out.row[C.REORGANISATION_ENERGY_2]
    # from memory: quinone/semiquinone inner-sphere lambda is a few tenths of an eV
    assert 0.0 <= lam < 1.0
    assert 0.0 <= lam2 < 1.0
    assert "reorganisation energy" not in out.row[C.DESCRIPTOR_NOTES]


def test_a_state_interrupted_between_conformers_keeps_the_finished_ones(tmp_path):
    # a run killed in the middle of a state left conformer 0 of the discharged state in the
    # store: status calls the candidate partly done, the resumed run reads the conformer back
    # instead of optimising it again, reaches the same result, and clears the checkpoint
    folder = _campaign(tmp_path / "camp", ["COc1ccc(OC)cc1"])
    (folder / "campaign.toml").write_text("[compute]\nrole = 'catholyte'\n[compute.conformers]\n"
                                          "n_generate = 4\nrefine_lowest = 2\n")
    camp = load_campaign(folder)
    settings = camp.compute
    cand = parse_candidate({"id": "m0", "smiles": "COc1ccc(OC)cc1"}, 2, settings)
    whole = compute_candidate(cand, settings, str(tmp_path / "whole.sqlite"))
    first = whole.states.states["discharged"].conformers[0]
    key = settings.result_hash()
    with Store(camp.store_path) as s:
        s.put(cand.main_smiles, CONFORMER_ENTRY, conformer_key(settings), whole.payloads[CONFORMER_ENTRY])
        s.put(cand.main_smiles, "charge=+0;unpaired=0:conformer:0", key, first.to_json())
    assert compute_status(camp).partial == ["m0"]
    resumed = compute_candidate(cand, settings, str(camp.store_path))
    assert resumed.states.states["discharged"].conformers[0].energy_eh == first.energy_eh  # read back
    assert resumed.new_engine_calls < whole.new_engine_calls
    assert resumed.conformer_seconds == 0.0  # the ensemble was stored too
    for name in ("discharged", "charged"):
        a, b = whole.states.states[name].conformers, resumed.states.states[name].conformers
        assert [c.energy_eh for c in b] == pytest.approx([c.energy_eh for c in a], abs=1e-7)
    with Store(camp.store_path) as s:
        assert s.get(cand.main_smiles, "charge=+0;unpaired=0:conformer:0", key) is None
        assert s.count(key) == 2  # the two whole states, nothing else under this key
    assert compute_status(camp).done == ["m0"]


def test_a_potential_beyond_any_electrolyte_window_is_flagged():
    # from memory (NIST Chemistry WebBook): the gas-phase ionisation energy of CF4 is about
    # 16 eV, far beyond any electrolyte's window; 1,4-dimethoxybenzene oxidises near +0.8 V vs Fc+/Fc
    settings = ComputeSettings(role="catholyte", conformers=FAST)
    rows = {}
    for cid, smi in (("cf4", "FC(F)(F)F"), ("dmb", "COc1ccc(OC)cc1")):
        cand = parse_candidate({"id": cid, "smiles": smi}, 2, settings)
        rows[cid] = candidate_row(compute_candidate(cand, settings, None), settings)
    assert rows["cf4"][C.potential_uncalibrated("fc")] > 5.0
    assert rows["cf4"][C.STATUS].startswith("implausible: computed potential +")
    assert "beyond +-5 V" in rows["cf4"][C.STATUS]
    assert rows["dmb"][C.STATUS] == "ok" and abs(rows["dmb"][C.potential_uncalibrated("fc")]) < 2.0


def test_bipolar_row_has_both_couples_exactly_as_the_one_role_rows_of_its_molecule(tmp_path):
    # a bipolar row computes the reduced, discharged and oxidised states; each couple is the
    # same couple an anolyte or a catholyte row of the molecule computes, sharing the stored states
    settings = ComputeSettings(conformers=FAST)
    dmb = "COc1ccc(OC)cc1"
    rows = [parse_candidate({"id": i, "smiles": dmb, "role": r}, k + 2, settings)
            for k, (i, r) in enumerate((("P", "bipolar"), ("A", "anolyte"), ("B", "catholyte")))]
    assert [s.name for s in candidate_states(rows[0])] == ["reduced", "discharged", "oxidised"]
    out, _ = compute_candidates(rows, settings, tmp_path / "s.sqlite", workers=1, progress=False)
    p, a, b = (o.row for o in out)
    red, ox = C.process_potential("reduction", "uncalibrated", "fc"), C.process_potential("oxidation", "uncalibrated", "fc")
    assert p[red] == a[C.potential_uncalibrated("fc")]
    assert p[ox] == b[C.potential_uncalibrated("fc")]
    # the symmetric-cell voltage is the difference; the shift and the reference cancel in it
    assert p[C.SYMMETRIC_GAP_UNCALIBRATED] == pytest.approx(p[ox] - p[red])
    assert np.isnan(p[C.potential_uncalibrated("fc")])  # no one-role potential for a bipolar row
    assert (p["charge_reduced"], p["charge_discharged"], p["charge_oxidised"]) == (-1, 0, 1)
    assert p["multiplicity_reduced"] == p["multiplicity_oxidised"] == 2
    # chain order reduced/discharged/oxidised: lambda of the reduction couple, then the oxidation's
    assert p[C.REORGANISATION_ENERGY] == pytest.approx(a[C.REORGANISATION_ENERGY], abs=1e-9)
    assert p[C.REORGANISATION_ENERGY_2] == pytest.approx(b[C.REORGANISATION_ENERGY], abs=1e-9)
    assert "steric descriptors from the discharged geometry" in p[C.DESCRIPTOR_NOTES]
    # the three rows share three stored states (no fourth)
    with Store(tmp_path / "s.sqlite") as s:
        names = {r[0] for r in s._con.execute("SELECT state FROM states WHERE settings_hash=?",
                                              (settings.result_hash(),))}
    assert names == {"charge=-1;unpaired=1", "charge=+0;unpaired=0", "charge=+1;unpaired=1"}


def test_a_bipolar_row_moving_two_electrons_is_refused_with_the_fix():
    from redoxfront.errors import InputError

    with pytest.raises(InputError, match="bipolar candidate moves one electron each way.*n_electrons must be 1"):
        parse_candidate({"id": "x", "smiles": "c1ccccc1", "role": "bipolar", "n_electrons": "2"}, 2,
                        ComputeSettings(conformers=FAST))


def test_status_counts_a_bipolar_row_interrupted_in_its_first_state_as_partly_done(tmp_path):
    # a bipolar row computes its discharged state first (the middle of its chain): a finished
    # conformer of that state left by a killed run makes the row partly done, not pending
    folder = _campaign(tmp_path / "camp", ["COc1ccc(OC)cc1"])
    (folder / "inputs" / "candidates.csv").write_text("id,smiles,role\nm0,COc1ccc(OC)cc1,bipolar\n")
    camp = load_campaign(folder)
    cand = parse_candidate({"id": "m0", "smiles": "COc1ccc(OC)cc1", "role": "bipolar"}, 2, camp.compute)
    whole = compute_candidate(cand, camp.compute, str(tmp_path / "whole.sqlite"))
    conf = whole.states.states["discharged"].conformers[0]
    with Store(camp.store_path) as s:
        s.put(cand.main_smiles, "charge=+0;unpaired=0:conformer:0", camp.compute.result_hash(), conf.to_json())
    assert compute_status(camp).partial == ["m0"]
    compute_campaign(camp, progress=False)
    assert compute_status(camp).done == ["m0"]
