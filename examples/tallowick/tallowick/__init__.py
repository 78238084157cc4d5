"""Tallowick: a Lanczos eigensolver for qubit Hamiltonians, from the (fictional)
Quarry Lane Computational Chemistry Group of Lower Wyndle.

benchsuite's demo scenario: release candidate 0.9.0rc1 carries a deliberate,
realistic bug in :mod:`tallowick.adapter` (see ``examples/tallowick/README.md``).
"""

__version__ = "0.9.0rc1"
