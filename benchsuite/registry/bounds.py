"""Limits on what a case file may contain, each with its reason.

A value outside these bounds is an :class:`~benchsuite.errors.InputError`
naming the file and the field, raised while the file is read -- before any
molecule is built.  The limits are generous for real molecules; they exist so
that a hostile or mistyped file ends in exit code 2 rather than an overflow,
a recursion error or gigabytes of memory deep inside NumPy or PySCF.
"""

from __future__ import annotations

#: Largest case file read (bytes).  A file of ``MAX_ATOMS`` atoms written one per line
#: is about 1 MB; anything this large is not a hand-written case file, and the TOML
#: parser holds the whole text in memory.
MAX_CASE_FILE_BYTES = 8 * 1024 * 1024

#: Deepest nesting of arrays/tables the TOML parser is allowed to reach.  The case
#: schema needs three levels (``atoms = [[...], ...]``); the parser recurses once per
#: level, so thousands of ``[`` would otherwise end in ``RecursionError``.
MAX_NESTING_DEPTH = 32

#: Most atoms in one case.  The too-close-atoms check uses a k-d tree (O(n log n) time,
#: O(n) memory: tens of MB at this size); no correlated reference can treat a molecule a
#: hundredth this size, so the limit only stops runaway or generated files.
MAX_ATOMS = 20_000

#: Largest |coordinate| in angstrom (bohr files are converted before the check).
#: At 1e4 Å a double still resolves 1e-12 Å, squared distances stay far from overflow,
#: and no molecule is 100 times this size; 1e308 Å overflows to inf when converted to bohr.
MAX_COORDINATE_ANGSTROM = 1.0e4

#: Two atoms closer than this (angstrom) are rejected as a typo (a duplicated atom line
#: or a coordinate in the wrong units); the shortest real bond, H2, is 0.74 Å.
MIN_ATOM_DISTANCE_ANGSTROM = 0.3

#: An atom with no other atom within this distance (angstrom) is an isolated fragment:
#: it does not interact with the rest of the molecule at any rung, and PySCF's SCF
#: stability analysis fails on the exactly degenerate orbitals of far-apart fragments
#: (H2 at 30 Å and at 1e6 Å end in ``LinearDependencyError``; 25 Å still works).  The
#: registry's most stretched case (H8 chain at 2.0 Å spacing) is far inside.
MAX_NEIGHBOUR_DISTANCE_ANGSTROM = 10.0

#: Largest |charge|.  Ions beyond a few charges are not bound in a Gaussian basis, and
#: PySCF keeps the electron count in a 64-bit integer (a charge of -2**63 overflows it).
MAX_ABS_CHARGE = 100

#: Largest |published energy| in hartree.  The total energy of the heaviest accepted atom
#: (Rn, about -2.3e4 Eh, from memory) times ``MAX_ATOMS`` is below it; an integer such as
#: ``1`` followed by 400 zeros does not even convert to a float.
MAX_ABS_ENERGY_HA = 1.0e9

#: Longest case name (characters); names become file names, table cells and task keys.
MAX_NAME_LENGTH = 64

#: Largest DMRG bond dimension a case file may ask for.  The two-site sweep holds
#: ~ k^2 M^2 renormalised operators of k orbitals in memory; M = 4000 for the 40-orbital
#: limit of the DMRG rung is already several GB, beyond any machine the gate runs on.
MAX_DMRG_BOND_DIM = 4000
#: Most bond dimensions in a case's DMRG schedule (each costs at least one sweep).
MAX_DMRG_BOND_DIMS = 12
#: Most sweeps per bond dimension (a converged sweep repeats its energy; more only costs time).
MAX_DMRG_SWEEPS_PER_DIM = 20
#: Largest perturbative noise: past 1e-2 the noise term swamps the density matrix it perturbs.
MAX_DMRG_NOISE = 1.0e-2
#: Davidson tolerance range: below 1e-12 it is under double-precision noise of a sweep energy,
#: above 1e-5 the sweep energy is not good to the microhartree the rung reports.
DMRG_DAVIDSON_TOL_RANGE = (1.0e-12, 1.0e-5)
