"""Property-based fuzzing of case files (hypothesis).

Each example starts from a valid H2 case, applies a few mutations (wrong types, huge / NaN / infinite
numbers, deep nesting, odd unicode, missing and unknown fields, plausible but impossible charges,
multiplicities, bases, frozen cores and active spaces, scans), writes TOML and sometimes damages the
bytes (UTF-16, stray bytes, truncation).  The file is loaded as ``benchsuite cases`` loads it and every
(case, basis) is prepared as ``run`` plans it (orbital space and room check, no SCF).  The only
allowed outcomes are success or an :class:`InputError` naming this file; anything else is a
traceback.  A per-example alarm turns a hang into a failure.

The default run tries about 100 files; ``-m slow`` runs the campaign of 1,500 and prints the counts.
"""

from __future__ import annotations

import json
import math
import re
import signal
from collections import Counter
from contextlib import contextmanager
from datetime import timedelta

import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from benchsuite.chem.space import prepare
from benchsuite.errors import InputError
from benchsuite.registry import Registry
from tests.conftest import BIB

#: Longest a single file may take (load + prepare) before it counts as a hang.
HANG_SECONDS = 30

BASE = {
    "name": "fuzz-h2", "title": "Hydrogen molecule, fuzzed", "units": "angstrom", "charge": 0,
    "multiplicity": 1, "atoms": [["H", 0.0, 0.0, 0.0], ["H", 0.0, 0.0, 0.7414]], "basis": ["sto-3g"],
    "tags": ["closed-shell"], "geometry_source": "scratch-geometry",
}
FIELDS = list(BASE) + ["frozen_core", "active_space", "scan", "reference", "notes", "threshold_mha"]


class Raw(str):
    """A TOML token written as is (numbers Python cannot print, such as 5,000-digit integers)."""


# -- values -----------------------------------------------------------------------------------------

huge_ints = st.sampled_from([2**63, -(2**63), 2**64 + 1, 10**400, -(10**300)])
scalars = st.one_of(
    st.integers(-10, 10), st.integers(-(2**70), 2**70), huge_ints,
    st.floats(allow_nan=True, allow_infinity=True), st.sampled_from([1e308, -1e308, 5e-324, 1e6, -0.0]),
    st.booleans(), st.text(max_size=12), st.sampled_from(["", "\n", "h2\n", "H\x7f", "\u202e", "sto-3g"]),
    st.just(Raw("1" + "0" * 5000)),
)
nested = st.integers(1, 400).map(lambda depth: Raw("[" * depth + "1" + "]" * depth))
values = st.one_of(scalars, nested, st.recursive(
    scalars, lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=6), inner,
                                                                          max_size=3), max_leaves=8))
elements = st.sampled_from(["H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Rn", "Xx", "h"])
coordinates = st.one_of(st.floats(-3, 3), st.floats(allow_nan=True, allow_infinity=True), scalars)
atoms = st.lists(st.one_of(st.tuples(elements, coordinates, coordinates, coordinates).map(list), values),
                 min_size=0, max_size=5)

plausible = {
    "charge": st.integers(-5, 5),
    "multiplicity": st.integers(0, 6),
    "basis": st.lists(st.sampled_from(["sto-3g", "6-31g", "cc-pvdz", "no-such-basis", "/etc/passwd"]),
                      min_size=1, max_size=2),
    "frozen_core": st.one_of(st.booleans(), st.integers(-1, 4)),
    "active_space": st.fixed_dictionaries({"electrons": st.integers(-1, 6), "orbitals": st.integers(-1, 6)}),
    "scan": st.fixed_dictionaries({"bond": st.lists(st.integers(-1, 3), min_size=2, max_size=2),
                                   "lengths": st.lists(coordinates, min_size=1, max_size=3)}),
    "reference": st.lists(st.fixed_dictionaries({
        "method": st.sampled_from(["fci", "ccsd"]), "basis": st.just("sto-3g"),
        "energy_ha": st.one_of(coordinates, huge_ints, st.just(Raw("1" + "0" * 400))),
        "source": st.sampled_from(["scratch-geometry", "missing-key"])}), max_size=2),
    "threshold_mha": coordinates,
    "atoms": atoms,
}


@st.composite
def case_documents(draw) -> dict:
    """The base case with one to four mutations."""
    doc = {k: v for k, v in BASE.items()}
    for _ in range(draw(st.integers(1, 4))):
        key = draw(st.sampled_from(FIELDS + ["unknown_field"]))
        action = draw(st.sampled_from(["plausible", "plausible", "hostile", "delete"]))
        if action == "delete":
            doc.pop(key, None)
        elif action == "plausible" and key in plausible:
            doc[key] = draw(plausible[key])
        else:
            doc[key] = draw(values)
    return doc


light = st.sampled_from(["H", "He", "Li", "Be", "B", "C", "N", "O", "F"])


@st.composite
def plausible_documents(draw) -> dict:
    """A well-formed molecule (1-4 light atoms on a line, 0.7-2.5 Å apart) with a random charge,
    multiplicity, basis and frozen core or active space: the orbital-space and room checks' inputs."""
    symbols = draw(st.lists(light, min_size=1, max_size=4))
    z, rows = 0.0, []
    for sym in symbols:
        rows.append([sym, 0.0, 0.0, z])
        z += draw(st.floats(0.7, 2.5))
    doc = {**BASE, "atoms": rows, "charge": draw(st.integers(-4, 4)),
           "multiplicity": draw(st.integers(1, 5)),
           "basis": draw(st.lists(st.sampled_from(["sto-3g", "6-31g"]), min_size=1, max_size=2, unique=True))}
    extra = draw(st.sampled_from(["none", "frozen_core", "active_space"]))
    if extra == "frozen_core":
        doc["frozen_core"] = draw(st.one_of(st.just(True), st.integers(1, 4)))
    elif extra == "active_space":
        doc["active_space"] = {"electrons": draw(st.integers(1, 8)), "orbitals": draw(st.integers(1, 8))}
    return doc


def toml_value(value) -> str:
    """One value in TOML syntax (inline arrays and tables; NaN and inf as TOML spells them)."""
    if isinstance(value, Raw):
        return str(value)
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        return ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    if isinstance(value, str):
        return json.dumps(value, ensure_ascii=False)
    if isinstance(value, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {toml_value(v)}" for k, v in value.items()) + "}"
    return "[" + ", ".join(toml_value(v) for v in value) + "]"


def to_toml(doc: dict) -> str:
    return "".join(f"{json.dumps(k)} = {toml_value(v)}\n" for k, v in doc.items())


@st.composite
def case_file_bytes(draw) -> bytes:
    """A mutated case document as bytes, sometimes damaged after encoding."""
    data = to_toml(draw(st.one_of(case_documents(), plausible_documents()))).encode("utf-8")
    damage = draw(st.sampled_from(["none"] * 6 + ["utf-16", "utf-8-bom", "stray bytes", "truncate"]))
    if damage == "utf-16":
        return to_toml(BASE).encode("utf-16") if draw(st.booleans()) else data.decode().encode("utf-16-le")
    if damage == "utf-8-bom":
        return b"\xef\xbb\xbf" + data
    at = draw(st.integers(0, len(data)))
    if damage == "stray bytes":
        return data[:at] + draw(st.binary(min_size=1, max_size=4)) + data[at:]
    return data[:at] if damage == "truncate" else data


# -- the property ---------------------------------------------------------------------------------

class Hang(BaseException):
    """Raised by the alarm; a BaseException so that no ``except Exception`` swallows it."""


@contextmanager
def hang_alarm(seconds: float):
    def fire(signum, frame):
        raise Hang(f"no answer after {seconds} s")

    old = signal.signal(signal.SIGALRM, fire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


TALLY: Counter = Counter()


def load_and_plan(path) -> str:
    """Load as ``cases`` does and prepare as ``run`` plans; the outcome as a short label."""
    try:
        with hang_alarm(HANG_SECONDS):
            registry = Registry.load(case_files=[path], builtin=False)
            for case in registry.cases.values():
                for basis in case.bases:
                    prepare(case, basis)
    except InputError as exc:
        assert exc.path is not None and exc.path == str(path), f"error does not name the file: {exc}"
        assert len(str(exc)) < 2000, "error messages stay short"
        return f"rejected: {exc.field or 'whole file (encoding, size, TOML syntax)'}"
    return "accepted"


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory):
    import pyscf.gto  # noqa: F401  (imported once here, not inside the first timed example)

    root = tmp_path_factory.mktemp("fuzz")
    (root / "sources.bib").write_text(BIB)
    yield root
    if TALLY:
        fields = Counter({k: v for k, v in TALLY.items() if k.startswith("rejected")})
        print(f"\ncase-file fuzz: {sum(TALLY.values())} files, {TALLY['accepted']} accepted, "
              f"{sum(fields.values())} rejected with an InputError, {TALLY['traceback']} tracebacks, "
              f"{TALLY['hang']} hangs")
        for label, count in fields.most_common():
            print(f"  {count:5d}  {label}")


def _check(fuzz_dir, data: bytes) -> None:
    path = fuzz_dir / "case.toml"
    path.write_bytes(data)
    try:
        outcome = re.sub(r"\[\d+\]", "[k]", load_and_plan(path))
    except BaseException as exc:                  # counted, then the example fails
        TALLY["hang" if isinstance(exc, Hang) else "traceback"] += 1
        raise
    outcome = re.sub(r"^(rejected: scan\.lengths) \(.*\)$", r"\1", outcome)   # one label for every point
    key = outcome.removeprefix("rejected: ").split(".")[0].split("[")[0]
    if outcome != "accepted" and key not in FIELDS and not key.startswith("whole file"):
        outcome = "rejected: an unknown key (misspelt or damaged bytes)"
    event(outcome)
    TALLY[outcome] += 1


#: Hypothesis' per-example deadline (the alarm above catches a real hang, which a deadline cannot).
COMMON = dict(suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
              deadline=timedelta(seconds=10))


@settings(max_examples=100, **COMMON)
@given(data=case_file_bytes())
def test_fuzzed_case_files_end_in_success_or_input_error(fuzz_dir, data):
    _check(fuzz_dir, data)


@pytest.mark.slow
@settings(max_examples=1500, **COMMON)
@given(data=case_file_bytes())
def test_fuzz_campaign_of_1500_case_files(fuzz_dir, data):
    _check(fuzz_dir, data)
