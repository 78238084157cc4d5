"""``benchsuite hamiltonian``: output schema and content, and bad input -> exit 2
before any work."""

from __future__ import annotations

import json

import numpy as np
import pytest

from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.pauli import PauliSum

from .reference import pyscf_sector_energies


def _json(run_cli, *argv):
    code, out, err = run_cli("hamiltonian", *argv, "--format", "json")
    assert code == 0, err
    return json.loads(out)


def test_json_record_rebuilds_the_hamiltonian(run_cli, case_ints):
    doc = _json(run_cli, "lih", "--encoding", "bravyi-kitaev", "--ordering", "blocked")
    for key in ("case", "basis", "encoding", "ordering", "n_qubits", "n_electrons", "constant_ha", "terms",
                "hf_bitstring", "metrics", "build_seconds", "conventions"):
        assert key in doc
    assert (doc["case"], doc["basis"], doc["encoding"], doc["ordering"]) == (
        "lih", "sto-3g", "bravyi-kitaev", "blocked")
    assert doc["n_qubits"] == 12 and doc["n_electrons"] == 4
    assert isinstance(doc["build_seconds"], float) and doc["build_seconds"] > 0
    assert all(t["pauli"] for t in doc["terms"])  # identity only in constant_ha
    rebuilt = PauliSum.from_terms([(t["pauli"], t["coeff"]) for t in doc["terms"]], 12) + doc["constant_ha"]
    mo, scf, _ = case_ints("lih", "sto-3g")
    assert rebuilt.allclose(encode_integrals(mo, "bravyi-kitaev", "blocked").pauli, atol=1e-12)
    assert doc["hf_energy_ha"] == pytest.approx(scf.energy_ha, abs=1e-8)
    assert doc["metrics"]["n_terms"] == len(doc["terms"])
    assert doc["conventions"]["ordering"] == "blocked"


def test_taper_and_exact(run_cli, case_ints):
    doc = _json(run_cli, "h2o", "--taper", "--exact")
    mo = case_ints("h2o", "sto-3g")[0]
    assert doc["n_qubits"] < 14 and doc["metrics"]["n_qubits_before_reductions"] == 14
    assert [r["kind"] for r in doc["conventions"]["reductions"]] == ["z2-tapering"]
    assert doc["exact"]["energies_ha"][0] == pytest.approx(float(pyscf_sector_energies(mo).min()), abs=1e-8)
    assert doc["exact"]["reduced_sector_holds_ground_state"] is True
    assert doc["exact"]["spin_square"][0] == pytest.approx(0.0, abs=1e-8)
    assert len(doc["hf_bitstring"]) == doc["n_qubits"]


def test_lowest_taper_sector(run_cli):
    doc = _json(run_cli, "oh", "--encoding", "bravyi-kitaev", "--taper", "--taper-sector", "lowest", "--exact")
    assert doc["exact"]["reduced_sector_holds_ground_state"] is True
    assert doc["exact"]["spin_square"][0] == pytest.approx(0.75, abs=1e-8)


def test_drop_spin_parity_qubits_and_text(run_cli):
    code, out, err = run_cli("hamiltonian", "h2", "--encoding", "parity", "--ordering", "blocked",
                             "--drop-spin-parity-qubits", "--format", "text", "--terms", "0")
    assert code == 0, err
    assert "qubits 2 (before reductions 4)" in out
    assert "reduction spin-parity-qubits-dropped: removed qubits [1, 3]" in out
    assert "HF bitstring (qubit 0 first)" in out and "largest terms (4 of 4)" in out


def test_case_file(run_cli, scratch):
    path = scratch(open_case_text())
    doc = _json(run_cli, "scratch-h2", "--case-file", str(path))
    assert doc["case"] == "scratch-h2" and doc["n_qubits"] == 4 and doc["hf_bitstring"] == "1100"


def open_case_text() -> str:
    from tests.conftest import H2_CASE

    return H2_CASE


BAD = {
    "unknown encoding": (["h2", "--encoding", "majorana"], "unknown encoding 'majorana'", "--encoding"),
    "unknown ordering": (["h2", "--ordering", "spiral"], "unknown spin-orbital ordering 'spiral'",
                         "--ordering"),
    "spin-parity qubit removal, interleaved": (["h2", "--encoding", "parity", "--drop-spin-parity-qubits"],
                                         "needs --ordering blocked", "--drop-spin-parity-qubits"),
    "spin-parity qubit removal, not parity": (["h2", "--ordering", "blocked", "--drop-spin-parity-qubits"],
                                        "needs --encoding parity", "--drop-spin-parity-qubits"),
    "beyond the exact qubit limit": (["lih", "--exact", "--max-exact-qubits", "10"],
                                     "12 qubits exceed the limit of 10", "--max-exact-qubits"),
    "beyond the default exact limit": (["h2o", "--basis", "6-31g", "--exact"],
                                       "26 qubits exceed the limit of 24", "--max-exact-qubits"),
    "unknown case": (["no-such-molecule"], "unknown case 'no-such-molecule'", "CASE"),
    "unknown tapering sector": (["h2", "--taper", "--taper-sector", "middle"], "unknown tapering sector",
                                "--taper-sector"),
    "sector without tapering": (["h2", "--taper-sector", "lowest"], "needs --taper", "--taper-sector"),
    "lowest sector beyond the limit": (["lih", "--taper", "--taper-sector", "lowest", "--max-exact-qubits",
                                        "8"], "12 qubits exceed the limit of 8", "--max-exact-qubits"),
    "bad epsilon": (["h2", "--epsilon-mha", "0"], "must be positive", "--epsilon-mha"),
}


@pytest.mark.parametrize("label", sorted(BAD))
def test_bad_input_exits_2_before_any_work(label, run_cli, tmp_path, monkeypatch):
    argv, message, fieldname = BAD[label]

    def no_scf(*a, **k):
        raise AssertionError("SCF/integrals started before the input was checked")

    monkeypatch.setattr("benchsuite.chem.space.case_integrals", no_scf)
    code, out, err = run_cli("hamiltonian", *argv, "--cache-dir", str(tmp_path / "c"))
    assert code == 2, err
    assert message in err
    assert f"field '{fieldname}'" in err
    assert not (tmp_path / "c").exists()


@pytest.mark.slow
def test_hamiltonian_on_the_120_qubit_case(run_cli, registry):
    """``benchsuite hamiltonian n2-tz-wide``: N2/cc-pVTZ all-electron, 120 qubits (two mask words).

    Independent routes: PySCF's RHF energy, run here (not through benchsuite's cache), against
    ``hf_energy_ha``; <HF|H|HF> re-summed from the JSON term list (diagonal strings only, sign
    (-1)^(number of occupied qubits under Z)); the 1-norm and the shot bound re-derived from the
    same list (bound = lambda^2 / eps^2: Wecker, Hastings & Troyer, PRA 92, 042303 (2015))."""
    from pyscf import gto, scf

    from benchsuite.constants import CHEMICAL_ACCURACY_MHA

    doc = _json(run_cli, "n2-tz-wide")
    assert doc["n_qubits"] == 120 and doc["n_electrons"] == 14
    terms, metrics = doc["terms"], doc["metrics"]
    assert metrics["n_terms"] == len(terms)
    coeffs = np.array([t["coeff"] for t in terms])
    assert metrics["one_norm_ha"] == pytest.approx(np.abs(coeffs).sum(), rel=1e-12)
    eps = CHEMICAL_ACCURACY_MHA / 1000.0
    assert metrics["shots"]["upper_bound"] == pytest.approx(metrics["one_norm_ha"] ** 2 / eps ** 2, rel=1e-12)
    assert metrics["qwc_groups"] is None and "not computed" in metrics["grouping_method"]
    qubits = {int(op[1:]) for t in terms for op in t["pauli"].split()}
    assert max(qubits) == 119 and any(q >= 64 for q in qubits)

    occupied = {q for q, bit in enumerate(doc["hf_bitstring"]) if bit == "1"}
    diagonal = doc["constant_ha"]
    for t in terms:
        ops = t["pauli"].split()
        if all(op[0] == "Z" for op in ops):
            diagonal += t["coeff"] * (-1) ** sum(int(op[1:]) in occupied for op in ops)
    case = registry.case("n2-tz-wide")
    mol = gto.M(atom=list(zip(case.symbols, case.coords)), basis="cc-pvtz", unit=case.units, verbose=0)
    e_rhf = scf.RHF(mol).run(conv_tol=1e-10).e_tot
    assert doc["hf_energy_ha"] == pytest.approx(e_rhf, abs=1e-7)
    assert diagonal == pytest.approx(e_rhf, abs=1e-7)
