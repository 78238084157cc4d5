"""Project defaults: ``[tool.benchsuite]`` in ``pyproject.toml`` and ``BENCHSUITE_*`` variables.

A setting's value comes from, first to last: the command line, the environment
variable, the ``[tool.benchsuite]`` table of the ``pyproject.toml`` in the current
directory or the nearest parent holding one, the built-in default.  Keys
(:data:`KEYS`) and their variables::

    db             BENCHSUITE_DB             results database (path)
    cache_dir      BENCHSUITE_CACHE          reference cache directory (path)
    workers        BENCHSUITE_WORKERS        worker processes of `run` (integer > 0)
    threshold_mha  BENCHSUITE_THRESHOLD_MHA  pass threshold in mHa used where neither the command
                                             line, the case nor the suite sets one (number > 0)
    timeout_s      BENCHSUITE_TIMEOUT_S      per-task time budget of `run` and `solve`, s (number > 0)
    max_memory_mb  BENCHSUITE_MAX_MEMORY_MB  per-worker address-space limit, MiB (number > 0)

Relative paths in ``pyproject.toml`` are relative to the directory of that file;
in a variable, to the working directory.  An unknown key or a bad value is an
:class:`~benchsuite.errors.InputError` naming the file (or variable) and key: exit 2.
Pure: no PySCF, importable from any layer.
"""

from __future__ import annotations

import math
import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

from benchsuite.errors import InputError

#: The suite the pytest plugin parametrises over when neither --bs-suite nor --bs-case is given.
DEFAULT_SUITE = "smoke"

#: key -> (environment variable, kind) where kind is "path", "int" or "float".
KEYS: dict[str, tuple[str, str]] = {
    "db": ("BENCHSUITE_DB", "path"),
    "cache_dir": ("BENCHSUITE_CACHE", "path"),
    "workers": ("BENCHSUITE_WORKERS", "int"),
    "threshold_mha": ("BENCHSUITE_THRESHOLD_MHA", "float"),
    "timeout_s": ("BENCHSUITE_TIMEOUT_S", "float"),
    "max_memory_mb": ("BENCHSUITE_MAX_MEMORY_MB", "float"),
}


@dataclass(frozen=True)
class Setting:
    """A resolved default: its value (None: the built-in default applies) and where it came from."""

    value: object
    source: str


def find_pyproject(start: Path | None = None) -> Path | None:
    """The ``pyproject.toml`` in ``start`` (default the working directory) or its nearest parent."""
    here = Path(start or Path.cwd()).resolve()
    for folder in (here, *here.parents):
        candidate = folder / "pyproject.toml"
        if candidate.is_file():
            return candidate
    return None


def _convert(raw, kind: str, base: Path | None, where: Path | None, key: str):
    """``raw`` (a TOML value or an environment string) as ``kind``; InputError(where, key) if bad."""
    try:
        if kind == "path":
            if not isinstance(raw, str) or not raw.strip():
                raise ValueError("expected a non-empty path string")
            path = Path(raw).expanduser()
            return path if path.is_absolute() or base is None else base / path
        if isinstance(raw, bool):
            raise ValueError("expected a number")
        value = int(raw) if kind == "int" else float(raw)
        if kind == "int" and isinstance(raw, float):
            raise ValueError("expected an integer")
    except (TypeError, ValueError) as exc:
        raise InputError(f"bad value {raw!r}: {exc}", path=where, field=key) from None
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"must be a finite positive number, got {raw!r}", path=where, field=key)
    return value


def project_table(pyproject: Path | None) -> dict:
    """The checked ``[tool.benchsuite]`` table of ``pyproject`` ({} when there is none)."""
    if pyproject is None:
        return {}
    try:
        doc = tomllib.loads(pyproject.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"cannot read: {exc}", path=pyproject, field="tool.benchsuite") from None
    table = doc.get("tool", {}).get("benchsuite", {})
    if not isinstance(table, dict):
        raise InputError("must be a table", path=pyproject, field="tool.benchsuite")
    unknown = sorted(set(table) - set(KEYS))
    if unknown:
        raise InputError(f"unknown key(s) {unknown}; known: {sorted(KEYS)}", path=pyproject,
                         field=f"tool.benchsuite.{unknown[0]}")
    return {key: _convert(value, KEYS[key][1], pyproject.parent, pyproject, f"tool.benchsuite.{key}")
            for key, value in table.items()}


def resolve_defaults(environ=None, start: Path | None = None) -> dict[str, Setting]:
    """Every key of :data:`KEYS` resolved from the environment, then ``[tool.benchsuite]``, then
    None (the built-in default); the command line is applied on top by the caller."""
    environ = os.environ if environ is None else environ
    pyproject = find_pyproject(start)
    table = project_table(pyproject)
    out = {}
    for key, (variable, kind) in KEYS.items():
        text = environ.get(variable)
        if text is not None and text != "":
            out[key] = Setting(_convert(text, kind, None, None, f"${variable}"), f"${variable}")
        elif key in table:
            out[key] = Setting(table[key], f"[tool.benchsuite] {key} in {pyproject}")
        else:
            out[key] = Setting(None, "built-in default")
    return out
