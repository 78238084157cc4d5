"""The problem's views, each against an independent route (OpenFermion or PySCF)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse.linalg

ENCODINGS = [{}, {"encoding": "bravyi-kitaev"}, {"encoding": "parity", "ordering": "blocked", "taper": True}]


def _of_index(states: np.ndarray, n_qubits: int) -> np.ndarray:
    """OpenFermion's get_sparse_operator puts qubit 0 in the most significant bit (common practice:
    its tensor order is qubit 0 leftmost); ours is bit q = qubit q."""
    out = np.zeros_like(states, dtype=np.int64)
    for q in range(n_qubits):
        out |= ((states.astype(np.int64) >> q) & 1) << (n_qubits - 1 - q)
    return out


@pytest.mark.parametrize("case", ["h2", "heh-cation", "oh"])
def test_exact_energy_of_declared_spin_is_pyscf_fci(built, case):
    """From the Pauli sum alone vs PySCF's determinant FCI with its spin check (the ladder's primary rung)."""
    prepared = built(case)
    assert prepared.problem.views.exact_energy_ha() == pytest.approx(prepared.reference.energy_ha, abs=1e-8)


def test_exact_energy_of_a_tapered_register(built):
    prepared = built("lih", encoding="parity", ordering="blocked", taper=True)
    assert prepared.problem.n_qubits < 12
    assert prepared.problem.views.exact_energy_ha() == pytest.approx(prepared.reference.energy_ha, abs=1e-8)


@pytest.mark.parametrize("enc", ENCODINGS[:2], ids=["jordan-wigner", "bravyi-kitaev"])
def test_sector_matrix_is_the_openfermion_matrix_block(built, enc):
    """The sector matrix equals the block of OpenFermion's get_sparse_operator(QubitOperator) on the
    sector's basis states, element by element; its lowest eigenvalue is the FCI energy."""
    from openfermion import get_sparse_operator

    prepared = built("lih", **enc)
    views = prepared.problem.views
    n = prepared.problem.n_qubits
    full = get_sparse_operator(views.qubit_operator(), n_qubits=n).tocsr()
    sm = views.sector_matrix()
    idx = _of_index(sm.states, n)
    block = full[idx][:, idx].toarray()
    assert sm.dimension == 225                   # C(6,2)^2 = 15^2: LiH STO-3G, 2 alpha + 2 beta in 6 orbitals
    assert np.abs(block - sm.matrix.toarray()).max() < 1e-10
    lowest = scipy.sparse.linalg.eigsh(sm.matrix, k=1, which="SA")[0][0]
    assert lowest == pytest.approx(prepared.reference.energy_ha, abs=1e-8)


def test_pauli_pairs_parse_back_in_openfermion(built):
    """OpenFermion parses our 'X0 Y1 Z3' labels itself; the sum equals qubit_operator()."""
    from openfermion import QubitOperator

    views = built("h4-square").problem.views
    rebuilt = QubitOperator()
    for label, coeff in views.pauli_terms():
        assert isinstance(coeff, float)
        rebuilt += QubitOperator(label, coeff)
    assert (rebuilt - views.qubit_operator()).induced_norm(1) < 1e-12
    assert dict(views.pauli_terms())[""] == pytest.approx(built("h4-square").problem.hamiltonian.constant_ha)


@pytest.mark.parametrize("case", ["lih", "oh"])
def test_fcidump_read_back_by_pyscf_gives_the_ladder_energy(built, tmp_path, case):
    """pyscf.tools.fcidump.read on our text, then PySCF's FCI with the spin fixed to the declared one."""
    from pyscf import fci
    from pyscf.tools import fcidump

    prepared = built(case)
    path = tmp_path / "FCIDUMP"
    path.write_text(prepared.problem.views.fcidump_text())
    d = fcidump.read(str(path))
    ms2 = d["MS2"]
    nelec = ((d["NELEC"] + ms2) // 2, (d["NELEC"] - ms2) // 2)
    solver = fci.addons.fix_spin_(fci.direct_spin1.FCI(), ss=(ms2 / 2) * (ms2 / 2 + 1))
    solver.conv_tol = 1e-12
    energy, _ = solver.kernel(d["H1"], d["H2"], d["NORB"], nelec, ecore=d["ECORE"])
    assert (d["NORB"], d["NELEC"]) == (prepared.problem.n_orbitals, prepared.problem.n_electrons)
    assert energy == pytest.approx(prepared.reference.energy_ha, abs=1e-8)
