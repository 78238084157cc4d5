"""The run's plan: what will be computed, checked in full before anything is.

:func:`plan_run` turns parsed command-line values into a :class:`RunPlan`: the
(case, basis) selection, the methods with their resolved and validated
options, the encoding, the tasks and the settings that judge them.  Every
input error surfaces here as an :class:`~benchsuite.errors.InputError` (exit
2) -- no reference has been computed and nothing has been stored yet.

``--resume`` rebuilds the plan from the stored run record (:func:`stored_plan_arguments`),
never from the command line, so a resumed run keeps its selection and settings.
"""

from __future__ import annotations

import math
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.methods.problem import Encoding
from benchsuite.runner import Task
from benchsuite.scoring import DEFAULT_THRESHOLD_MHA, MULTIPLE_TESTING, THRESHOLD_SOURCE
from benchsuite.store.records import task_key

#: Largest seed accepted (it is stored in a signed 64-bit column).
MAX_SEED = 2**63 - 1


@dataclass(frozen=True)
class RunSettings:
    """How a run is executed and judged; stored with the run so that ``--resume`` restores it.

    ``threshold_mha`` is the command-line override (None: case, then suite, then
    the project default, then 1 kcal/mol); ``default_threshold_mha`` / ``default_threshold_source`` are
    the project default (``[tool.benchsuite]`` or ``$BENCHSUITE_THRESHOLD_MHA``, see
    :mod:`benchsuite.defaults`) that replaces 1 kcal/mol where neither case nor suite sets one.  ``timeout_s`` / ``max_memory_mb`` per method task: None means the
    runner's defaults (3600 s, 4096 MiB).  ``multiple_testing`` is ``holm`` (family-wise error rate of the
    run's stochastic fail claims) or ``bh`` (false-discovery rate).  ``shots`` (None: none) passes each
    method's state through the measurement stage (:mod:`benchsuite.qubit.measurement`), its total split
    between qubit-wise-commuting groups by ``shot_allocation`` (``uniform`` or ``proportional``).
    """

    basis: str | None = None
    threshold_mha: float | None = None
    confidence: float = 0.95
    multiple_testing: str = "holm"
    allow_inconclusive: bool = False
    require_converged: bool = False
    timeout_s: float | None = None
    reference_timeout_s: float | None = 1800.0
    max_determinants: int = 5_000_000
    max_memory_mb: float | None = None
    cases: tuple[str, ...] = ()
    case_file: tuple[str, ...] = ()
    encoding: dict = field(default_factory=lambda: asdict(Encoding()))
    default_threshold_mha: float | None = None
    default_threshold_source: str | None = None
    shots: int | None = None
    shot_allocation: str = "uniform"

    def shot_plan(self):
        """The measurement stage every method's state passes through (``--shots``), or None."""
        from benchsuite.qubit.measurement import ShotPlan

        if self.shots is None:
            return None
        plan = ShotPlan(self.shots, self.shot_allocation)
        if plan.problems():
            raise InputError(plan.problems()[0], field="--shots")
        return plan

    def run_threshold(self) -> tuple[float, str]:
        """The run's headline threshold (mHa) and its source: the command line, then the project
        default, then 1 kcal/mol (cases and suites may set their own per task: :func:`threshold_for`)."""
        if self.threshold_mha is not None:
            return self.threshold_mha, "--threshold-mha"
        if self.default_threshold_mha is not None:
            return self.default_threshold_mha, self.default_threshold_source or THRESHOLD_SOURCE
        return DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE

    def to_dict(self) -> dict:
        return asdict(self)

    @classmethod
    def from_dict(cls, doc: dict) -> "RunSettings":
        known = {k: v for k, v in doc.items() if k in cls.__dataclass_fields__}
        for key in ("cases", "case_file"):
            known[key] = tuple(known.get(key) or ())
        return cls(**known)


def threshold_for(case, suite, cli_threshold_mha: float | None,
                  default: tuple[float, str] | None = None) -> tuple[float, str]:
    """A case's pass threshold (mHa) and where it comes from: command line, then case, then suite,
    then ``default`` (the project's ``(threshold_mha, source)``), then 1 kcal/mol."""
    if cli_threshold_mha is not None:
        return cli_threshold_mha, "--threshold-mha"
    if case.threshold_mha is not None:
        return case.threshold_mha, f"case file {case.path}"
    if suite is not None and suite.threshold_mha is not None:
        return suite.threshold_mha, f"suite {suite.name}"
    if default is not None and default[0] is not None:
        return default
    return DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE


@dataclass
class RunPlan:
    """Everything a run will do.  ``methods`` maps a method spec to ``(object, failure)``."""

    suite: object | None
    suite_name: str | None
    case_names: list[str]
    entries: list[tuple]                  # (Case, Basis)
    methods: dict
    options: dict[str, dict]
    encoding: Encoding
    settings: RunSettings
    tasks: list[Task]
    seed: int = 0

    def _threshold(self, case) -> tuple[float, str]:
        s = self.settings
        default = None if s.default_threshold_mha is None else (s.default_threshold_mha,
                                                                s.default_threshold_source or "project default")
        return threshold_for(case, self.suite, s.threshold_mha, default)

    def threshold_for(self, case) -> float:
        return self._threshold(case)[0]

    def threshold_source_for(self, case) -> str:
        return self._threshold(case)[1]


# -- checks of single values ---------------------------------------------------------

def check_positive(value, flag: str, allow_none: bool = True):
    """A finite number > 0 (or None when allowed); NaN, inf and overflow are input errors."""
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise InputError(f"must be a finite positive number, got {value!r}", field=flag)
    return value


def check_output_path(path, flag: str) -> Path | None:
    """An output file that can be written: not a directory, in a writable (or creatable) directory."""
    if path is None:
        return None
    path = Path(path)
    if path.is_dir():
        raise InputError(f"{path} is a directory; give a file name", field=flag)
    parent = path.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not parent.is_dir() or not os.access(parent, os.W_OK | os.X_OK):
        raise InputError(f"cannot write {path}: {parent} is not a writable directory", field=flag)
    if path.exists() and not os.access(path, os.W_OK):
        raise InputError(f"cannot write {path}: the file is read-only", field=flag)
    return path


def check_settings(s: RunSettings, seed: int, workers: int | None) -> None:
    for flag, value in (("--threshold-mha", s.threshold_mha), ("--timeout-s", s.timeout_s),
                        ("threshold_mha", s.default_threshold_mha),
                        ("--reference-timeout-s", s.reference_timeout_s),
                        ("--max-determinants", s.max_determinants), ("--workers", workers),
                        ("--max-memory-mb", s.max_memory_mb)):
        check_positive(value, flag)
    if not (isinstance(s.confidence, float) and 0 < s.confidence < 1):
        raise InputError(f"must lie strictly between 0 and 1, got {s.confidence!r}", field="--confidence")
    if s.multiple_testing not in MULTIPLE_TESTING:
        raise InputError(f"must be one of {list(MULTIPLE_TESTING)}", field="--multiple-testing")
    if not 0 <= seed <= MAX_SEED:
        raise InputError(f"must lie in [0, 2^63 - 1], got {seed}", field="--seed")


# -- the plan ----------------------------------------------------------------------------

def plan_run(registry, suite_name: str | None, case_names: list[str] | None, method_specs: list[str],
             option_items: list[str], settings: RunSettings, seed: int = 0,
             workers: int | None = None) -> RunPlan:
    """Check everything and list the tasks; raises :class:`InputError` naming the field."""
    from benchsuite.chem.space import prepare
    from benchsuite.methods.base import resolve_options
    from benchsuite.methods.discovery import resolve_method

    check_settings(settings, seed, workers)
    if not method_specs:
        raise InputError("give at least one --method", field="--method")
    if suite_name:
        entries = [(e.case, e.basis) for e in registry.suite_entries(suite_name, settings.basis)]
    else:
        entries = [(e.case, e.basis) for e in registry.named_entries(case_names or [], settings.basis)]
    encoding = Encoding.from_fields(settings.encoding).check()
    options = split_method_options(option_items, method_specs)
    methods = {}
    for spec in method_specs:
        obj, failure = resolve_method(spec)
        if obj is not None:
            options[spec] = resolve_options(obj, options[spec])
        methods[spec] = (obj, failure)
    for case, basis in entries:
        prepare(case, basis)                       # every case and basis checked before any work
    shots = settings.shot_plan()
    shot_doc = None if shots is None else shots.as_dict()
    tasks = [Task(case, basis, encoding, spec, options[spec],
                  task_key(case.name, basis.label, encoding.label, spec, options[spec], shot_doc), shots)
             for case, basis in entries for spec in method_specs]
    suite = registry.suites.get(suite_name) if suite_name else None
    return RunPlan(suite, suite_name, list(case_names or []), entries, methods, options, encoding, settings,
                   tasks, seed)


def parse_key_values(items: list[str], flag: str) -> dict[str, str]:
    """``["a=1", "b = x"]`` -> ``{"a": "1", "b": "x"}``; anything else is an input error."""
    out = {}
    for item in items:
        key, eq, value = item.partition("=")
        if not eq or not key.strip():
            raise InputError(f"expected key=value, got {item!r}", field=flag)
        out[key.strip()] = value.strip()
    return out


def split_method_options(items: list[str], methods: list[str]) -> dict[str, dict[str, str]]:
    """``--option METHOD.KEY=VALUE`` items grouped by method."""
    out: dict[str, dict[str, str]] = {m: {} for m in methods}
    for key, value in parse_key_values(items, "--option").items():
        method, dot, opt = key.rpartition(".")
        if not dot or method not in out:
            raise InputError(f"{key!r} must be METHOD.KEY with METHOD one of {methods}", field="--option")
        out[method][opt] = value
    return out


def stored_plan_arguments(run) -> dict:
    """The plan inputs of a stored run, for ``--resume``: selection, methods, options, settings, seed."""
    doc = dict((run.summary or {}).get("settings", {}))
    if "encoding" not in doc:                      # runs stored before the encoding was kept as fields
        doc["encoding"] = _encoding_from_label(run.encoding)
    return {"suite_name": run.suite, "case_names": None if run.suite else list(run.cases),
            "method_specs": list(run.methods),
            "option_items": [f"{m}.{k}={v}" for m, opts in run.options.items() for k, v in opts.items()],
            "settings": RunSettings.from_dict(doc), "seed": run.seed}


def _encoding_from_label(label: str) -> dict:
    return asdict(Encoding.from_label(label))
