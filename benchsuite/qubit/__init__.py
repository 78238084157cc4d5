"""Qubit Hamiltonians from MO integrals: encodings, reductions, exact sector
energies and resource metrics (see README.md beside this file).

Entry points: :func:`benchsuite.qubit.hamiltonian.encode_integrals`,
:func:`benchsuite.qubit.hamiltonian.drop_spin_parity_qubits`,
:func:`benchsuite.qubit.tapering.taper`,
:func:`benchsuite.qubit.sector.sector_eigen`,
:func:`benchsuite.qubit.metrics.resource_metrics`.
"""
