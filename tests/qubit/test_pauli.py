"""PauliSum algebra against dense matrices built independently with numpy.kron
(the textbook Pauli matrices), and the OpenFermion QubitOperator round trip."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.qubit.pauli import (
    PauliSum,
    anticommutes,
    compress_bits,
    expand_bits,
    label_of,
    parse_label,
    popcount,
    qubitwise_commute,
)

MATS = {"I": np.eye(2), "X": np.array([[0, 1], [1, 0]]), "Y": np.array([[0, -1j], [1j, 0]]),
        "Z": np.diag([1.0, -1.0])}


def dense(ps: PauliSum) -> np.ndarray:
    """Matrix in the basis |b>, bit q of b = qubit q (so qubit 0 is the last kron factor)."""
    n = ps.n_qubits
    out = np.zeros((2 ** n, 2 ** n), dtype=complex)
    for label, c in ps:
        letters = ["I"] * n
        for tok in label.split():
            letters[int(tok[1:])] = tok[0]
        m = np.array([[1.0]])
        for q in reversed(range(n)):
            m = np.kron(m, MATS[letters[q]])
        out += c * m
    return out


def random_sum(rng, n: int, k: int, complex_coeffs: bool = True) -> PauliSum:
    x = rng.integers(0, 2 ** n, size=k, dtype=np.uint64)
    z = rng.integers(0, 2 ** n, size=k, dtype=np.uint64)
    c = rng.normal(size=k) + (1j * rng.normal(size=k) if complex_coeffs else 0)
    return PauliSum(n, x, z, c)


@pytest.fixture
def rng():
    return np.random.default_rng(20260101)


def test_label_round_trip_and_dense_form():
    ps = PauliSum.from_terms([("X0 Y1 Z3", 0.5), ("", -1.25), ("Z3 X0 Y1", 0.25)])
    assert len(ps) == 2
    assert dict(ps) == {"": -1.25, "X0 Y1 Z3": 0.75}
    x, z, top = parse_label("X0 Y1 Z3")
    assert (x, z, top) == (0b11, 0b1010, 4)
    assert label_of(x, z, 4) == "X0 Y1 Z3"
    # Y is a genuine Y: sigma(x=1, z=1) on one qubit equals the Y matrix.
    assert np.allclose(dense(PauliSum.from_terms([("Y0", 1.0)])), MATS["Y"])


@pytest.mark.parametrize("bad", ["X0 X0", "Q1", "X", "Z4096"])
def test_bad_labels_are_input_errors(bad):
    with pytest.raises(InputError):
        PauliSum.from_terms([(bad, 1.0)])


def test_products_match_matrix_products(rng):
    a, b = random_sum(rng, 4, 7), random_sum(rng, 4, 6)
    assert np.allclose(dense(a * b), dense(a) @ dense(b))
    assert np.allclose(dense(a + b), dense(a) + dense(b))
    assert np.allclose(dense(a - b), dense(a) - dense(b))
    assert np.allclose(dense(a.scale(0.5 - 2j)), (0.5 - 2j) * dense(a))
    assert np.allclose(dense(3.0 * a + 1.5), 3.0 * dense(a) + 1.5 * np.eye(16))


def test_commutation_predicates_match_matrices(rng):
    for _ in range(40):
        x1, z1, x2, z2 = (np.uint64(v) for v in rng.integers(0, 8, size=4))
        p = dense(PauliSum(3, [x1], [z1], [1.0]))
        q = dense(PauliSum(3, [x2], [z2], [1.0]))
        assert bool(anticommutes(x1, z1, x2, z2)) == np.allclose(p @ q, -q @ p)
        letters_agree = all(
            ((int(x1) >> k) & 1, (int(z1) >> k) & 1) in ((0, 0), ((int(x2) >> k) & 1, (int(z2) >> k) & 1))
            or ((int(x2) >> k) & 1, (int(z2) >> k) & 1) == (0, 0) for k in range(3))
        assert bool(qubitwise_commute(x1, z1, x2, z2)) == letters_agree


def test_simplify_merges_and_drops():
    ps = PauliSum(2, [1, 1, 2, 3], [0, 0, 2, 0], [0.5, -0.5 + 1e-14, 2.0, 1e-13], merge=False)
    s = ps.simplify(1e-12)
    assert dict(s) == {"Y1": 2.0}
    assert s.is_real
    assert len(PauliSum(2, [1, 1], [0, 0], [0.5, -0.5])) == 0


def test_one_norm_excludes_identity_and_comparisons():
    ps = PauliSum.from_terms([("", -7.0), ("Z0", 0.5), ("X0 X1", -0.25)])
    assert ps.one_norm() == pytest.approx(0.75)
    assert ps.one_norm(include_identity=True) == pytest.approx(7.75)
    other = PauliSum.from_terms([("", -7.0), ("Z0", 0.5 + 1e-12), ("X0 X1", -0.25)])
    assert ps.allclose(other, 1e-10)
    assert not ps.allclose(PauliSum.from_terms([("Z0", 0.5)]), 1e-10)
    assert ps.identity_coeff() == -7.0
    assert dict(ps.without_identity()) == {"Z0": 0.5, "X0 X1": -0.25}


def test_openfermion_round_trip(rng):
    """Independent route: OpenFermion's own QubitOperator arithmetic and sparse matrix."""
    import openfermion as of

    a = random_sum(rng, 5, 12)
    op = a.to_openfermion()
    back = PauliSum.from_openfermion(op, 5)
    assert back.allclose(a, 1e-14)
    ref = of.get_sparse_operator(op, n_qubits=5).toarray()
    # OpenFermion puts qubit 0 in the most significant bit; ours is the least.
    perm = [int(format(i, "05b")[::-1], 2) for i in range(32)]
    assert np.allclose(dense(a), ref[np.ix_(perm, perm)])
    b = random_sum(rng, 5, 9)
    assert PauliSum.from_openfermion(op * b.to_openfermion(), 5).allclose(a * b, 1e-12)


def test_bit_compress_expand_inverse(rng):
    masks = rng.integers(0, 2 ** 20, size=50, dtype=np.uint64)
    removed = [3, 7, 15]
    cleared = masks & ~np.uint64(sum(1 << q for q in removed))
    assert np.array_equal(expand_bits(compress_bits(cleared, removed), removed), cleared)
    assert np.array_equal(popcount(compress_bits(cleared, removed)), popcount(cleared))


def test_qubit_limit_is_an_input_error():
    with pytest.raises(InputError):
        PauliSum(4097, [0], [0], [1.0])  # past Register.MAX_REGISTER_QUBITS
