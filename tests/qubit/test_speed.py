"""Speed against named anchors, measured in the same run (pytest-benchmark).

Run: ``pytest -m speed --benchmark-enable tests/qubit/test_speed.py``.  Each
test times our route and the anchor with ``pedantic`` (few rounds, so CI can
run it), takes the ratio of the minimum round times and asserts the issue's
threshold; the ratios are stored in the benchmark's ``extra_info``.

Anchors: OpenFermion (McClean et al., Quantum Sci. Technol. 5, 034014 (2020))
``get_fermion_operator`` + ``jordan_wigner`` on the same integrals; OpenFermion
``get_number_preserving_sparse_operator`` + SciPy ``eigsh``; PySCF FCI
``direct_spin1.kernel`` (Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018)).
All three routes start from the same MO integrals.
"""

from __future__ import annotations

import pytest

from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.sector import sector_eigen

from .reference import interaction_operator, pyscf_sector_energies

pytestmark = pytest.mark.speed


def _min_seconds(fx) -> float:
    return fx.stats.stats.min


@pytest.mark.parametrize("name,basis", [("n2", "6-31g"), ("h2o", "6-31g")])
def test_jordan_wigner_build_vs_openfermion(benchmark_set, case_ints, name, basis):
    """Our JW build at least 100x faster than FermionOperator -> jordan_wigner."""
    import openfermion as of

    mo = case_ints(name, basis)[0]
    ours_fx, ref_fx = benchmark_set("ours"), benchmark_set("openfermion")
    ours = ours_fx.pedantic(lambda: encode_integrals(mo, "jordan-wigner"), rounds=5, warmup_rounds=1)
    ref = ref_fx.pedantic(lambda: of.jordan_wigner(of.get_fermion_operator(interaction_operator(mo, "interleaved"))),
                          rounds=1)
    ratio = _min_seconds(ref_fx) / _min_seconds(ours_fx)
    ours_fx.extra_info.update({"openfermion_over_ours": ratio, "n_qubits": ours.n_qubits,
                               "n_terms": len(ours.pauli) - 1, "openfermion_terms": len(ref.terms)})
    print(f"\n{name}/{basis}: {ours.n_qubits} qubits, {len(ours.pauli) - 1} terms; ours "
          f"{_min_seconds(ours_fx):.4f} s, OpenFermion {_min_seconds(ref_fx):.2f} s, ratio {ratio:.0f}")
    assert ratio >= 100


@pytest.mark.parametrize("name", ["h2o", "beh2"])
def test_sector_ground_energy_vs_openfermion_and_pyscf(benchmark_set, case_ints, name):
    """Sector ground energy from the integrals: ours (encode + sector solve) at
    least 50x faster than OpenFermion's number-preserving sparse operator +
    eigsh; the ratio to PySCF FCI is recorded, with the goal ours <= 3x FCI."""
    import openfermion as of
    import scipy.sparse.linalg

    mo = case_ints(name, "sto-3g")[0]
    n_qubits, n_el = mo.n_spin_orbitals, mo.n_electrons

    def openfermion_route():
        fop = of.get_fermion_operator(interaction_operator(mo, "interleaved"))
        sparse = of.get_number_preserving_sparse_operator(fop, n_qubits, n_el, spin_preserving=True)
        return scipy.sparse.linalg.eigsh(sparse, k=1, which="SA")[0][0]

    ours_fx, ref_fx, fci_fx = benchmark_set("ours"), benchmark_set("openfermion"), benchmark_set("pyscf-fci")
    ours = ours_fx.pedantic(lambda: sector_eigen(encode_integrals(mo), spin=False).ground_ha, rounds=10,
                            warmup_rounds=1)
    ref = ref_fx.pedantic(openfermion_route, rounds=1)
    e_fci = fci_fx.pedantic(lambda: float(pyscf_sector_energies(mo).min()), rounds=5, warmup_rounds=1)
    assert ours == pytest.approx(e_fci, abs=1e-8) and ref == pytest.approx(e_fci, abs=1e-8)
    ratio_of = _min_seconds(ref_fx) / _min_seconds(ours_fx)
    ratio_fci = _min_seconds(ours_fx) / _min_seconds(fci_fx)
    ours_fx.extra_info.update({"openfermion_over_ours": ratio_of, "ours_over_pyscf_fci": ratio_fci})
    print(f"\n{name}/sto-3g: ours {_min_seconds(ours_fx):.4f} s, OpenFermion {_min_seconds(ref_fx):.2f} s "
          f"(ratio {ratio_of:.0f}), PySCF FCI {_min_seconds(fci_fx):.4f} s (ours/FCI {ratio_fci:.2f})")
    assert ratio_of >= 50
    assert ratio_fci <= 3.0
