"""Element symbols and atomic numbers (IUPAC periodic table; common practice)."""

SYMBOLS = (
    "H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn "
    "Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce "
    "Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn"
).split()

#: Atomic number by symbol, H = 1 ... Rn = 86.
ATOMIC_NUMBER = {sym: z for z, sym in enumerate(SYMBOLS, start=1)}


def normalise_symbol(symbol: str) -> str | None:
    """Return the canonical spelling ('he' -> 'He'), or None for an unknown element."""
    canon = symbol.strip().capitalize()
    return canon if canon in ATOMIC_NUMBER else None
