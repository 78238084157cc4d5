"""Conventions that silently break comparisons, each shown to matter."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.sector import fock_space_lowest, sector_eigen

from .reference import pyscf_sector_energies


def test_heh_cation_fock_space_minimum_is_not_the_cation(case_ints):
    """HeH+ (2 electrons): the lowest eigenvalue of the whole 4-qubit Fock space
    belongs to the 3-electron sector (neutral HeH lies below the cation), so an
    unrestricted minimum is not the cation's FCI energy; restricting to
    (1 alpha, 1 beta) is.  FCI energies from PySCF on the same integrals."""
    mo = case_ints("heh-cation", "sto-3g")[0]
    ham = encode_integrals(mo)
    e_cation = float(pyscf_sector_energies(mo).min())
    e_neutral = min(float(pyscf_sector_energies(mo, 2, 1).min()), float(pyscf_sector_energies(mo, 1, 2).min()))
    whole = fock_space_lowest(ham.pauli)
    assert e_neutral < e_cation - 0.1
    assert whole == pytest.approx(e_neutral, abs=1e-10)
    assert whole < e_cation - 0.1
    assert sector_eigen(ham).ground_ha == pytest.approx(e_cation, abs=1e-10)
    assert sector_eigen(ham, n_electrons=3, two_sz=1).ground_ha == pytest.approx(e_neutral, abs=1e-10)


@pytest.mark.parametrize("encoding", ["jordan-wigner", "bravyi-kitaev", "parity"])
def test_orderings_same_energies_different_labels(case_ints, encoding):
    """Interleaved and blocked spin-orbital orders: same sector spectrum (four
    roots), same constant and term count for JW, different Pauli labels."""
    mo = case_ints("lih", "sto-3g")[0]
    inter = encode_integrals(mo, encoding, "interleaved")
    block = encode_integrals(mo, encoding, "blocked")
    e_i = sector_eigen(inter, n_roots=4).energies_ha
    e_b = sector_eigen(block, n_roots=4).energies_ha
    assert np.allclose(e_i, e_b, atol=1e-10)
    assert set(inter.pauli.labels()) != set(block.pauli.labels())
    assert inter.hf_bitstring() != block.hf_bitstring()
    assert inter.basis_state_energy(inter.hf_state()) == pytest.approx(
        block.basis_state_energy(block.hf_state()), abs=1e-10)
    if encoding == "jordan-wigner":
        # Single-Z strings (the occupation numbers) are only relabelled; hopping
        # strings are not, because the Jordan-Wigner Z-chains follow the order.
        def single_z(h):
            return sorted(round(c, 12) for lab, c in h.pauli if lab.count(" ") == 0 and lab.startswith("Z"))

        assert inter.constant_ha == pytest.approx(block.constant_ha, abs=1e-12)
        assert single_z(inter) == single_z(block)
    assert inter.conventions()["ordering"] == "interleaved" and block.conventions()["ordering"] == "blocked"


def test_dropping_the_frozen_core_constant_shifts_by_exactly_it(case_ints):
    """HF with a frozen 1s core (hf-fc): the constant is nuclear repulsion plus
    the frozen-core energy.  Encoding the same integrals with the constant
    dropped shifts every sector energy and the identity coefficient by exactly
    that constant -- tens of hartree, so a forgotten constant is never subtle."""
    mo = case_ints("hf-fc", "sto-3g")[0]
    assert mo.n_core == 1 and abs(mo.core_energy_ha) > 10
    assert mo.constant_ha == pytest.approx(mo.nuclear_repulsion_ha + mo.core_energy_ha, abs=1e-12)
    bare = dataclasses.replace(mo, constant_ha=0.0)
    full_h, bare_h = encode_integrals(mo), encode_integrals(bare)
    e_full = sector_eigen(full_h, n_roots=3).energies_ha
    e_bare = sector_eigen(bare_h, n_roots=3).energies_ha
    assert np.allclose(e_full - e_bare, mo.constant_ha, atol=1e-10)
    assert full_h.constant_ha - bare_h.constant_ha == pytest.approx(mo.constant_ha, abs=1e-12)
    assert full_h.without_constant().allclose(bare_h.without_constant(), atol=1e-12)
    assert e_full[0] == pytest.approx(float(pyscf_sector_energies(mo).min()), abs=1e-8)
