"""Registers past 64 qubits (two mask words), checked against OpenFermion's jordan_wigner
(McClean et al., Quantum Sci. Technol. 5, 034014 (2020)) as the independent route."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.qubit.encodings import majorana_table
from benchsuite.qubit.majorana import spin_free_pauli
from benchsuite.qubit.pauli import PauliSum
from benchsuite.qubit.register import Register, RegisterTooWide


def _sparse_integrals(n: int, seed: int = 3):
    """A few real integrals with the 8-fold symmetry, touching orbitals on both sides of qubit 64."""
    rng = np.random.default_rng(seed)
    h1 = np.zeros((n, n))
    eri = np.zeros((n,) * 4)
    for p, q in [(0, 33), (31, 32), (33, 33), (2, 2)]:
        h1[p, q] = h1[q, p] = rng.normal()
    for p, q, r, s in [(0, 33, 32, 1), (33, 33, 0, 0), (31, 32, 32, 31), (2, 33, 2, 33)]:
        v = rng.normal()
        for a, b, c, d in [(p, q, r, s), (q, p, r, s), (p, q, s, r), (q, p, s, r)]:
            eri[a, b, c, d] = eri[c, d, a, b] = v
    return h1, eri


def _openfermion_jw(h1, eri, n):
    import openfermion as of

    op = of.FermionOperator()
    for p, q in (map(int, pq) for pq in zip(*np.nonzero(h1))):
        for s in range(2):
            op += of.FermionOperator(((2 * p + s, 1), (2 * q + s, 0)), float(h1[p, q]))
    for p, q, r, t in (map(int, k) for k in zip(*np.nonzero(eri))):
        for s in range(2):
            for u in range(2):
                op += of.FermionOperator(((2 * p + s, 1), (2 * r + u, 1), (2 * t + u, 0), (2 * q + s, 0)),
                                         float(0.5 * eri[p, q, r, t]))
    return of.jordan_wigner(op)


def test_wide_jordan_wigner_matches_openfermion():
    """68 qubits (two words), interleaved ordering: identical strings and coefficients."""
    n = 34
    h1, eri = _sparse_integrals(n)
    ours = spin_free_pauli(h1, eri, 0.0, majorana_table("jordan-wigner", 2 * n), "interleaved", tol=1e-12)
    assert ours.wide and ours.x.shape[1] == 2
    ref = PauliSum.from_openfermion(_openfermion_jw(h1, eri, n), 2 * n).simplify(1e-12)
    assert len(ours) == len(ref)
    assert ours.max_difference(ref) < 1e-12
    assert abs(ours.one_norm() - ref.one_norm()) < 1e-12


def test_wide_labels_round_trip_through_openfermion():
    p = PauliSum.from_terms([("X0 Y70 Z127", 0.5), ("Z64", -1.0), ("", 2.0)], 128)
    assert sorted(p.labels()) == ["", "X0 Y70 Z127", "Z64"]
    assert PauliSum.from_openfermion(p.to_openfermion(), 128).allclose(p)


def test_register_bounds_and_refusal():
    assert Register(120).n_words == 2 and Register(64).n_words == 1
    with pytest.raises(InputError):
        Register(-1)
    with pytest.raises(RegisterTooWide, match="120 qubits"):
        Register(120).require_single_word("exact-sector")


# -- metrics on wide registers ------------------------------------------------------------------
# Independent route: the same Hamiltonian with every qubit q moved to q + SHIFT on a 128-qubit
# register (strings straddle the word boundary at qubit 64).  Its metrics must equal the narrow
# register's, and its QWC groups are checked from the label text alone, not from masks.

SHIFT = 57


def _shifted(pauli: PauliSum, n_qubits: int = 128) -> PauliSum:
    terms = [(" ".join(f"{t[0]}{int(t[1:]) + SHIFT}" for t in label.split()), c) for label, c in pauli]
    return PauliSum.from_terms(terms, n_qubits)


def _letters(label: str) -> dict:
    return {int(t[1:]): t[0] for t in label.split()}


def test_wide_metrics_equal_the_narrow_register(case_ints):
    """H2O/STO-3G under Jordan-Wigner (14 qubits) shifted across qubit 64: term count, 1-norm, QWC
    group count and every shot figure on the HF state agree (1e-9 relative)."""
    from benchsuite.qubit.hamiltonian import encode_integrals
    from benchsuite.qubit.metrics import qwc_groups, shot_estimate

    ints, _, _ = case_ints("h2o")
    narrow = encode_integrals(ints).pauli
    wide = _shifted(narrow)
    assert wide.wide and wide.n_strings() == narrow.n_strings()
    assert wide.one_norm() == pytest.approx(narrow.one_norm(), rel=1e-12)
    g_narrow, g_wide = qwc_groups(narrow), qwc_groups(wide)
    assert g_wide.max() == g_narrow.max()
    hf_narrow = (1 << ints.n_electrons) - 1
    a = shot_estimate(narrow, hf_narrow, groups=g_narrow)
    b = shot_estimate(wide, hf_narrow << SHIFT, groups=g_wide)
    for field in ("no_grouping", "with_grouping", "upper_bound"):
        assert getattr(b, field) == pytest.approx(getattr(a, field), rel=1e-9), field


def test_wide_qwc_groups_checked_from_labels(case_ints):
    """Every wide group is qubit-wise commuting by its labels' letters, and every non-identity
    string is in exactly one group."""
    from benchsuite.qubit.hamiltonian import encode_integrals
    from benchsuite.qubit.metrics import qwc_groups

    ints, _, _ = case_ints("h2o")
    wide = _shifted(encode_integrals(ints).pauli)
    groups = qwc_groups(wide)
    labels = wide.labels()
    assert all((g == -1) == (label == "") for g, label in zip(groups, labels))
    for g in range(int(groups.max()) + 1):
        seen: dict = {}
        for j in np.flatnonzero(groups == g):
            for q, letter in _letters(labels[j]).items():
                assert seen.setdefault(q, letter) == letter, (g, labels[j])


def test_grouping_limit_is_reported_not_silent(case_ints, monkeypatch):
    """Past MAX_GROUPING_STRINGS the record says so: no group count, no grouped shots, the
    ungrouped figures kept."""
    from benchsuite.qubit import metrics
    from benchsuite.qubit.hamiltonian import encode_integrals

    ints, _, _ = case_ints("h2o")
    ham = encode_integrals(ints)
    full = metrics.resource_metrics(ham)
    monkeypatch.setattr(metrics, "MAX_GROUPING_STRINGS", ham.pauli.n_strings() - 1)
    capped = metrics.resource_metrics(ham)
    assert capped["qwc_groups"] is None and capped["shots"]["with_grouping"] is None
    assert "not computed" in capped["grouping_method"] and str(ham.pauli.n_strings()) in capped["grouping_method"]
    assert capped["shots"]["no_grouping"] == full["shots"]["no_grouping"]
    assert capped["n_terms"] == full["n_terms"] and capped["one_norm_ha"] == full["one_norm_ha"]


def test_wide_tapering_matches_narrow_spectrum(case_ints):
    """Z2 tapering on the shifted 128-qubit H2O/STO-3G JW register.  Each of the 114 idle qubits
    adds one Z-type symmetry (Z_q) and two Pauli symmetries (X_q, Z_q); the molecule's own four
    remain.  Tapered in the Hartree-Fock sector, both registers leave 10 qubits and the same
    spectrum (dense diagonalisation of OpenFermion's sparse matrices as the independent route)."""
    import openfermion as of

    from benchsuite.qubit.hamiltonian import Z2_TAPERING, Reduction, encode_integrals
    from benchsuite.qubit.tapering import find_symmetries, reference_eigenvalues

    ints, _, _ = case_ints("h2o")
    ham = encode_integrals(ints)
    narrow, wide = ham.pauli, _shifted(ham.pauli)
    sym_n, sym_w = find_symmetries(narrow), find_symmetries(wide)
    idle = wide.n_qubits - narrow.n_qubits
    assert sym_w.n_z_symmetries == sym_n.n_z_symmetries + idle
    assert sym_w.n_pauli_symmetries == sym_n.n_pauli_symmetries + 2 * idle
    hf = ham.hf_state()
    spectra = []
    for pauli, sym, state in ((narrow, sym_n, hf), (wide, sym_w, hf << SHIFT)):
        red = Reduction(kind=Z2_TAPERING, n_qubits_before=pauli.n_qubits, generators=sym.z_generators,
                        qubits=sym.pivots, eigenvalues=reference_eigenvalues(sym.z_generators, state),
                        clifford=True)
        tapered = red.apply(pauli)
        assert tapered.n_qubits == narrow.n_qubits - sym_n.n_z_symmetries
        matrix = of.get_sparse_operator(tapered.to_openfermion(), tapered.n_qubits).toarray()
        spectra.append(np.linalg.eigvalsh(matrix))
    np.testing.assert_allclose(spectra[1], spectra[0], atol=1e-9)
