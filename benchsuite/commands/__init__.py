"""The commands behind ``benchsuite <command>``: argument definitions and printing only.

Each module defines ``add_<name>(subparsers)`` (every argument with its help)
and ``run_<name>(args) -> int``; :mod:`benchsuite.cli` registers them, applies
the project defaults (:mod:`benchsuite.defaults`) and maps errors to exit codes.
The work itself is done below: :mod:`benchsuite.api` (problems, solving one
method, comparisons, stored runs), :mod:`benchsuite.gate` (runs),
:mod:`benchsuite.qubit` (Hamiltonian kernels) and :mod:`benchsuite.report`
(rendering).  Nothing below imports this package.
"""
