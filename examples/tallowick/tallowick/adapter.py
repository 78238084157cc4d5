"""Tallowick as a benchsuite method (entry point ``tallowick``).

The adapter rebuilds Tallowick's own :class:`~tallowick.molecule.Molecule`
from the benchsuite case, asks it for the electron-number sector, and runs
the Lanczos solver on the encoded Pauli sum restricted to that sector.
"""

from __future__ import annotations

import numpy as np

from benchsuite.methods.base import MethodResult, Option, Resources, SectorState
from benchsuite.qubit.sector import ProductSector, check_qubit_limit
from benchsuite.registry import Registry
from tallowick import __version__
from tallowick.lanczos import lowest_eigenpair
from tallowick.molecule import Molecule

_REGISTRY = None


def _case(name: str):
    global _REGISTRY
    if _REGISTRY is None:
        _REGISTRY = Registry.load()
    if name not in _REGISTRY.cases:
        raise ValueError(f"Tallowick's front end only knows benchsuite's built-in molecules, not {name!r}")
    return _REGISTRY.cases[name]


class TallowickMethod:
    name = "tallowick"
    description = f"Tallowick {__version__}: Lanczos in the molecule's electron-number sector"
    options = (Option("max_steps", int, 80, "largest Krylov space"),
               Option("tol", float, 1e-9, "Ritz residual at which to stop (hartree)"))
    variational = True
    stochastic = False

    def run(self, problem, options):
        ham = problem.hamiltonian
        check_qubit_limit(ham.n_modes, None)
        case = _case(problem.case)
        # The molecule as Tallowick sees it.  (0.9.0rc1: charge and multiplicity
        # are not passed on, so the Molecule defaults -- neutral, lowest spin -- apply.)
        molecule = Molecule(symbols=tuple(case.symbols))
        n_alpha, n_beta = molecule.active_sector(problem.integrals.n_core)
        sector = ProductSector(ham, n_alpha, n_beta)
        op = sector.operator(ham.pauli)
        rng = np.random.default_rng(problem.seed)
        start = np.zeros(sector.dimension)
        start[int(np.argmin(op.diagonal))] = 1.0
        start += 1e-3 * rng.standard_normal(sector.dimension)
        res = lowest_eigenpair(lambda v: op @ v, start, options["max_steps"], options["tol"])
        psi = SectorState(sector.states, res.vector / np.linalg.norm(res.vector), problem.n_qubits)
        return MethodResult(
            energy_ha=res.eigenvalue, converged=res.converged, iterations=res.steps,
            resources=Resources(n_parameters=0),
            metadata={"solver": f"tallowick {__version__}", "sector": {"n_alpha": n_alpha, "n_beta": n_beta},
                      "sector_dimension": sector.dimension, "ritz_residual_ha": res.residual},
            state=psi)
