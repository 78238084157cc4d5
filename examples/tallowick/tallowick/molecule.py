"""Tallowick's molecule description: which electron-number sector to solve in."""

from __future__ import annotations

from dataclasses import dataclass

from benchsuite.registry.elements import ATOMIC_NUMBER


@dataclass(frozen=True)
class Molecule:
    """Atoms by symbol, a net charge and a spin multiplicity (2S + 1).

    ``multiplicity=None`` means the lowest spin the electron count allows
    (singlet for an even count, doublet for an odd one).
    """

    symbols: tuple[str, ...]
    charge: int = 0
    multiplicity: int | None = None

    @property
    def n_electrons(self) -> int:
        return sum(ATOMIC_NUMBER[s] for s in self.symbols) - self.charge

    @property
    def two_sz(self) -> int:
        """2 S_z of the high-S_z component: multiplicity - 1."""
        if self.multiplicity is None:
            return self.n_electrons % 2
        two_s = self.multiplicity - 1
        if (self.n_electrons - two_s) % 2:
            raise ValueError(f"{self.n_electrons} electrons cannot have multiplicity {self.multiplicity}")
        return two_s

    def active_sector(self, n_core_orbitals: int) -> tuple[int, int]:
        """(alpha, beta) electrons outside ``n_core_orbitals`` doubly occupied core orbitals."""
        n = self.n_electrons - 2 * n_core_orbitals
        return (n + self.two_sz) // 2, (n - self.two_sz) // 2
