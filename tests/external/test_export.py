"""Problem export, each format read back by an independent reader (PySCF, OpenFermion)."""

from __future__ import annotations

import json

import pytest
import scipy.sparse.linalg

from benchsuite import api
from benchsuite.methods.export import export_problem, sidecar_path
from benchsuite.methods.fingerprint import problem_fingerprint


def _export(built, cache, case, fmt, basis=None, **enc):
    prepared = built(case, basis, **enc)
    fp = problem_fingerprint(api.load_case(case), basis, prepared.encoding, cache)
    return prepared, export_problem(prepared, fp, fmt)


@pytest.mark.parametrize("case, basis", [("lih", None), ("hf-fc", "sto-3g"), ("h2o-stretch-2p0-cas44", "sto-3g")],
                         ids=["all-electron", "frozen-core", "active-space"])
def test_fcidump_through_pyscf_reproduces_the_reference(built, cache, tmp_path, case, basis):
    """PySCF's own FCIDUMP reader and its determinant FCI (an independent route) give the registry's
    FCI/CASCI energy to 1e-8 Eh, ECORE (nuclear repulsion + frozen core) included."""
    from pyscf import ao2mo, fci
    from pyscf.tools import fcidump

    prepared, export = _export(built, cache, case, "fcidump", basis)
    path = tmp_path / "problem.fcidump"
    path.write_text(export.text)
    data = fcidump.read(str(path), verbose=False)
    norb, nelec, ms2 = data["NORB"], data["NELEC"], data["MS2"]
    eri = ao2mo.restore(1, data["H2"], norb)
    na, nb = (nelec + ms2) // 2, (nelec - ms2) // 2
    energy, _ = fci.direct_spin1.kernel(data["H1"], eri, norb, (na, nb), ecore=data["ECORE"], conv_tol=1e-12)
    assert energy == pytest.approx(prepared.reference.energy_ha, abs=1e-8)
    assert export.sidecar["fingerprint"] == export.fingerprint.token


def _sector_ground(op, n_qubits: int, n_electrons: int, sz: float) -> float:
    from openfermion import get_sparse_operator
    from openfermion.linalg import jw_sz_restrict_operator

    sparse = get_sparse_operator(op, n_qubits=n_qubits)
    block = jw_sz_restrict_operator(sparse, sz, n_electrons=n_electrons, n_qubits=n_qubits)
    return float(scipy.sparse.linalg.eigsh(block, k=1, which="SA")[0][0])


@pytest.mark.parametrize("case", ["h2", "lih"])
def test_pauli_json_read_into_openfermion_has_the_sector_ground_energy(built, cache, case):
    """The JSON labels and coefficients, put into an OpenFermion QubitOperator by hand and restricted to
    the (N, S_z) sector by OpenFermion's Jordan-Wigner restriction (spin-orbital 2p = alpha, 2p+1 =
    beta, our interleaved order), have the FCI energy as their lowest eigenvalue."""
    from openfermion import QubitOperator

    prepared, export = _export(built, cache, case, "pauli-json")
    doc = json.loads(export.text)
    op = QubitOperator("", doc["constant_ha"])
    for term in doc["terms"]:
        op += QubitOperator(term["label"], term["coeff"])
    sector = doc["sector"]
    ground = _sector_ground(op, doc["n_qubits"], sector["n_electrons"], sector["s_z"])
    assert ground == pytest.approx(prepared.reference.energy_ha, abs=1e-8)
    assert doc["fingerprint"] == export.fingerprint.token == doc["fingerprint_document"]["token"]
    assert doc["hf_bitstring"] == prepared.problem.hf_bitstring and doc["n_terms"] == len(doc["terms"])
    for key in ("encoding", "ordering", "qubit_order", "reductions", "sign_convention", "operator_convention"):
        assert key in doc["conventions"]


@pytest.mark.parametrize("enc", [{}, {"encoding": "parity", "ordering": "blocked", "taper": True}],
                         ids=["jordan-wigner", "parity-tapered"])
def test_openfermion_file_reads_back_equal(built, cache, tmp_path, enc):
    """OpenFermion's own load_operator reads the file back into the problem's QubitOperator, term for term."""
    from openfermion.utils import load_operator

    prepared, export = _export(built, cache, "lih", "openfermion", **enc)
    (tmp_path / "lih.data").write_text(export.text)
    loaded = load_operator(file_name="lih", data_directory=str(tmp_path), plain_text=True)
    expected = prepared.problem.views.qubit_operator()
    assert set(loaded.terms) == set(expected.terms)
    assert max(abs(loaded.terms[k] - expected.terms[k]) for k in expected.terms) == 0.0


def test_problem_command_writes_file_and_fingerprint(run_cli, tmp_path):
    out = tmp_path / "h2.fcidump"
    code, stdout, _ = run_cli("problem", "h2", "--format", "fcidump", "-o", str(out))
    assert code == 0 and out.is_file()
    side = json.loads(sidecar_path(out).read_text())
    assert side["fingerprint"] in stdout
    assert set(side["fingerprint_document"]["components"]) == {"geometry", "basis", "charge", "multiplicity",
                                                               "space", "orbitals", "encoding"}
    code, _, err = run_cli("problem", "h2", "--format", "openfermion", "-o", str(tmp_path / "h2.txt"))
    assert code == 2 and ".data" in err and not (tmp_path / "h2.txt").exists()
    code, _, err = run_cli("problem", "no-such-case", "-o", str(tmp_path / "x.json"))
    assert code == 2 and "unknown case" in err
