"""benchsuite: an accuracy gate for qubit-based quantum-chemistry solvers.

Energies are in hartree (Eh) everywhere inside the package; errors are shown in
millihartree (mHa).  Physical constants live in :mod:`benchsuite.constants`.
"""

__version__ = "0.1.0"
