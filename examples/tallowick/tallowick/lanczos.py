"""Lanczos iteration with full reorthogonalisation for the lowest eigenvalue.

Standard practice for small sparse Hermitian matrices: build the Krylov basis
q_1, A q_1, ... orthonormalised against every previous vector (so no ghost
eigenvalues), diagonalise the tridiagonal matrix T_k each step, and stop when
the Ritz residual |beta_k s_k| of the lowest Ritz pair is below ``tol``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg


@dataclass(frozen=True)
class LanczosResult:
    eigenvalue: float
    vector: np.ndarray
    steps: int
    residual: float
    converged: bool


def lowest_eigenpair(apply, start: np.ndarray, max_steps: int = 80, tol: float = 1e-9) -> LanczosResult:
    """Lowest eigenpair of the Hermitian operator ``apply`` (v -> A v) from ``start``."""
    dim = start.size
    q = start / np.linalg.norm(start)
    basis = [q]
    alphas: list[float] = []
    betas: list[float] = []
    theta, s, residual = 0.0, np.ones(1), np.inf
    for step in range(1, min(max_steps, dim) + 1):
        w = apply(basis[-1])
        alphas.append(float(np.real(np.vdot(basis[-1], w))))
        qs = np.array(basis).T
        w = w - qs @ (qs.conj().T @ w)
        w = w - qs @ (qs.conj().T @ w)         # twice is enough (Kahan-Parlett)
        beta = float(np.linalg.norm(w))
        evals, evecs = scipy.linalg.eigh_tridiagonal(np.array(alphas), np.array(betas))
        theta, s = float(evals[0]), evecs[:, 0]
        residual = abs(beta * s[-1])
        if residual < tol or step == dim:
            break
        betas.append(beta)
        basis.append(w / beta)
    vector = np.array(basis[:len(s)]).T @ s
    return LanczosResult(theta, vector, len(alphas), residual, residual < tol or len(alphas) == dim)
