"""Checks on what a method returns, made twice: in the worker and again in the parent.

The worker turns a :class:`MethodResult` into plain, bounded, JSON-safe
fields (:func:`result_fields`); a breach of the contract is a
:class:`Breach` that the caller records as ``invalid`` with the reason.  The
parent trusts nothing it receives: :func:`decode_fields` reads the worker's
JSON (never a pickle, which could run code) and :func:`checked_fields`
re-checks every field's type and range; a malformed payload becomes
``invalid`` or ``error``, never an exception.

Bounds (all documented here, in hartree and bytes): ``|energy_ha|`` and
``stderr_ha`` below :data:`MAX_ABS_ENERGY_HA`; ``iterations`` an integer in
``0 .. MAX_ITERATIONS``; at most :data:`MAX_PARAMETERS` finite parameters;
resource fields numbers (``|x| <= MAX_RESOURCE_VALUE``) or null, with
``compilation`` a short text; ``message`` at most :data:`MAX_MESSAGE_CHARS`
and metadata at most :data:`MAX_METADATA_JSON_BYTES` of JSON, both truncated
with a note.
"""

from __future__ import annotations

import json
import math
import numbers
import reprlib
from dataclasses import fields as dataclass_fields

import numpy as np

from benchsuite.methods.base import Resources
from benchsuite.scoring import STATE_QUANTITIES, WORKER_STATUSES

MAX_ABS_ENERGY_HA = 1e6
MAX_ITERATIONS = 10**9
MAX_PARAMETERS = 100_000
MAX_RESOURCE_VALUE = 10**18
MAX_TEXT_RESOURCE_CHARS = 200
TEXT_RESOURCES = ("compilation",)
MAX_MESSAGE_CHARS = 64 * 1024
MAX_OUTPUT_CHARS = 20 * 1024
MAX_METADATA_JSON_BYTES = 256 * 1024
#: A worker's whole answer, in bytes of JSON; a longer one is refused unread.
MAX_PAYLOAD_BYTES = 8 * 1024 * 1024

_REPR = reprlib.Repr()
_REPR.maxstring = _REPR.maxother = 60


class Breach(ValueError):
    """A value that breaks the method contract; ``str()`` says which field and why."""


def short_repr(value) -> str:
    """A bounded repr that cannot fail (huge ints, hostile ``__repr__``)."""
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 128:
        return f"<int of {value.bit_length()} bits>"
    try:
        return _REPR.repr(value)
    except Exception:
        return f"<{type(value).__name__} object>"


def bounded_text(text: str, limit: int = MAX_MESSAGE_CHARS) -> str:
    """``text`` cut to about ``limit`` characters, keeping its start and end, with a note."""
    if len(text) <= limit:
        return text
    head, tail = text[: limit * 3 // 4], text[-(limit // 4):]
    return f"{head}\n[... {len(text) - len(head) - len(tail)} characters not kept ...]\n{tail}"


def real(value, what: str, bound: float = MAX_ABS_ENERGY_HA) -> float:
    """A finite float with ``|x| < bound`` from a real number (numpy scalars fine; str, bool, complex not)."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise Breach(f"{what} = {short_repr(value)} ({type(value).__name__}): not a finite number")
    try:
        val = float(value)
    except (OverflowError, ValueError, TypeError):
        raise Breach(f"{what} = {short_repr(value)}: not a finite number (outside the float range)") from None
    if not math.isfinite(val):
        raise Breach(f"{what} = {val!r}: not a finite number")
    if abs(val) >= bound:
        raise Breach(f"{what} = {val!r}: outside ±{bound:g}, not a plausible value")
    return val


def count(value, what: str, bound: int) -> int:
    """An integer in ``0 .. bound`` (numpy integers and integral floats fine)."""
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise Breach(f"{what} = {short_repr(value)} ({type(value).__name__}): not an integer")
    if not 0 <= int(value) <= bound:
        raise Breach(f"{what} = {short_repr(int(value))}: outside 0 .. {bound}")
    return int(value)


def flag(value, what: str) -> bool | None:
    if value is None or isinstance(value, (bool, np.bool_)):
        return None if value is None else bool(value)
    if isinstance(value, numbers.Integral) and int(value) in (0, 1):
        return bool(value)
    raise Breach(f"{what} = {short_repr(value)} ({type(value).__name__}): not true or false")


def parameters(values) -> list[float] | None:
    if values is None:
        return None
    if isinstance(values, np.ndarray):
        values = values.ravel().tolist() if values.ndim <= 1 else values
    if not isinstance(values, (list, tuple)):
        raise Breach(f"parameters = {short_repr(values)} ({type(values).__name__}): not a list of numbers")
    if len(values) > MAX_PARAMETERS:
        raise Breach(f"parameters: {len(values)} values, more than {MAX_PARAMETERS}")
    return [real(v, f"parameters[{i}]", bound=math.inf) for i, v in enumerate(values)]


def resources(res) -> dict:
    """Resource fields with a value: numbers (ints stay ints), ``compilation`` a short text."""
    if res is None:
        return {}
    names = [f.name for f in dataclass_fields(Resources)]
    if isinstance(res, Resources):
        items = {n: getattr(res, n, None) for n in names}
    elif isinstance(res, dict):
        items = dict(res)
    else:
        raise Breach(f"resources = {short_repr(res)} ({type(res).__name__}): not a Resources")
    out = {}
    for key, value in items.items():
        if key not in names:
            raise Breach(f"resources has an unknown field {short_repr(key)}")
        if value is None:
            continue
        what = f"resources.{key}"
        if key in TEXT_RESOURCES:
            if not isinstance(value, str) or len(value) > MAX_TEXT_RESOURCE_CHARS:
                raise Breach(f"{what} = {short_repr(value)}: not a text of at most "
                             f"{MAX_TEXT_RESOURCE_CHARS} characters")
            out[key] = value
        elif isinstance(value, numbers.Integral) and not isinstance(value, (bool, np.bool_)):
            out[key] = count(value, what, MAX_RESOURCE_VALUE)
        else:
            out[key] = real(value, what, bound=MAX_RESOURCE_VALUE)
    return out


def plain(obj, depth: int = 0):
    """Metadata reduced to JSON-safe values: numpy becomes Python, NaN/inf null, other objects a short repr."""
    if depth > 50:
        raise Breach("metadata nested more than 50 levels deep")
    if isinstance(obj, dict):
        return {str(k) if isinstance(k, (str, int, float, bool)) else short_repr(k): plain(v, depth + 1)
                for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [plain(v, depth + 1) for v in obj]
    if isinstance(obj, np.ndarray):
        return plain(obj.tolist(), depth + 1)
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, int) and not isinstance(obj, bool) and abs(obj) >= 2**63:
        return short_repr(obj)
    if obj is None or isinstance(obj, (bool, int, float, str)):
        return obj
    return short_repr(obj)


def metadata(meta) -> dict:
    """Plain metadata; beyond :data:`MAX_METADATA_JSON_BYTES` of JSON, a note and the start of it."""
    try:
        value = plain(meta if isinstance(meta, dict) else {"value": meta})
        text = json.dumps(value, allow_nan=False)
    except (Breach, RecursionError, TypeError, ValueError) as exc:
        return {"metadata_dropped": f"not representable as JSON ({bounded_text(str(exc), 200)})"}
    if len(text.encode()) > MAX_METADATA_JSON_BYTES:
        return {"metadata_truncated": f"{len(text.encode())} bytes of JSON, more than the "
                                      f"{MAX_METADATA_JSON_BYTES} kept; its start:", "start": text[:2000]}
    return value


def result_fields(result) -> dict:
    """The checked fields of a :class:`MethodResult` (raises :class:`Breach`)."""
    stderr = result.stderr_ha
    fields = {"energy_ha": real(result.energy_ha, "energy_ha"),
              "stderr_ha": None if stderr is None else real(stderr, "stderr_ha"),
              "converged": flag(result.converged, "converged"),
              "iterations": count(0 if result.iterations is None else result.iterations, "iterations",
                                  MAX_ITERATIONS),
              "parameters": parameters(result.parameters), "resources": resources(result.resources),
              "metadata": metadata(result.metadata)}
    if stderr is not None and fields["stderr_ha"] < 0:
        raise Breach(f"stderr_ha = {fields['stderr_ha']!r}: negative")
    return fields


# -- the parent's side ------------------------------------------------------------

def encode_fields(fields: dict) -> bytes:
    """A worker's answer as JSON bytes (NaN/inf allowed through: the parent rejects them)."""
    try:
        return json.dumps(fields).encode()
    except (TypeError, ValueError) as exc:
        return json.dumps({"status": "error", "seconds": float(fields.get("seconds", 0.0)),
                           "message": f"the worker's result is not plain data ({exc})"}).encode()


def decode_fields(data: bytes, needs_energy: bool) -> dict:
    """Parse and check a worker's JSON answer; anything malformed becomes an ``error``."""
    if len(data) > MAX_PAYLOAD_BYTES:
        return {"status": "error", "message": f"worker result of {len(data)} bytes refused "
                                              f"(at most {MAX_PAYLOAD_BYTES})"}
    try:
        raw = json.loads(data)
    except (ValueError, RecursionError) as exc:
        return {"status": "error", "message": f"worker result is not readable JSON ({short_repr(str(exc))})"}
    return checked_fields(raw, needs_energy)


_PROBLEM_COUNTS = ("n_qubits", "n_terms", "qwc_groups")


def _checked_problem(problem) -> dict:
    if not isinstance(problem, dict):
        raise Breach(f"problem = {short_repr(problem)}: not a mapping")
    # a count may be null: qwc_groups is not computed past qubit.metrics.MAX_GROUPING_STRINGS strings
    out = {k: _optional(problem[k], lambda v, k=k: count(v, f"problem.{k}", MAX_RESOURCE_VALUE))
           for k in _PROBLEM_COUNTS if k in problem}
    if "one_norm_ha" in problem:
        out["one_norm_ha"] = real(problem["one_norm_ha"], "problem.one_norm_ha", bound=math.inf)
    return out


def _checked_state_check(check) -> dict:
    """``metadata["state_check"]``: measured and declared <N>, <S_z>, <S^2> finite numbers or null."""
    if not isinstance(check, dict):
        raise Breach(f"metadata.state_check = {short_repr(check)}: not a mapping")
    declared = check.get("declared")
    if not isinstance(declared, dict):
        raise Breach("metadata.state_check has no 'declared' values")
    for key, _ in STATE_QUANTITIES:
        for where, doc in (("", check), ("declared.", declared)):
            if doc.get(key) is not None:
                doc[key] = real(doc[key], f"metadata.state_check.{where}{key}")
    if check.get("checked") and (check.get("n_electrons") is None or check.get("sz") is None):
        raise Breach("metadata.state_check is marked checked without <N> and <S_z>")
    return check


def _checked_metadata(meta: dict) -> dict:
    """Plain bounded metadata; the state check is kept aside so that no size cut can drop it."""
    rest = dict(meta)
    check = rest.pop("state_check", None)
    out = metadata(rest)
    if check is not None:
        out["state_check"] = _checked_state_check(plain(check))
    return out


def _optional(value, check):
    return None if value is None else check(value)


_CHECKS = {
    "message": lambda v: bounded_text(v if isinstance(v, str) else short_repr(v)),
    "captured_output": lambda v: bounded_text(v if isinstance(v, str) else short_repr(v), MAX_OUTPUT_CHARS),
    "seconds": lambda v: real(v, "seconds", bound=math.inf),
    "energy_ha": lambda v: _optional(v, lambda x: real(x, "energy_ha")),
    "stderr_ha": lambda v: _optional(v, lambda x: real(x, "stderr_ha")),
    "converged": lambda v: flag(v, "converged"),
    "iterations": lambda v: _optional(v, lambda x: count(x, "iterations", MAX_ITERATIONS)),
    "parameters": parameters,
    "resources": resources,
    "metadata": lambda v: _checked_metadata(v if isinstance(v, dict) else {"value": v}),
    "problem": _checked_problem,
    "cache": lambda v: bounded_text(str(v), 200),
    "primary_status": lambda v: _optional(v, lambda x: bounded_text(str(x), 200)),
}


def checked_fields(raw, needs_energy: bool) -> dict:
    """Re-check a worker's fields; unknown keys are dropped.

    ``needs_energy``: a method job whose status is ``ok`` must carry a finite
    energy.  A bad field (including a malformed ``metadata["state_check"]``) makes
    the task ``invalid``.  A worker cannot claim ``below-exact`` or ``wrong-state``:
    those are decided by the parent (:func:`benchsuite.scoring.result_status`).
    """
    if not isinstance(raw, dict):
        return {"status": "error", "message": f"worker sent {type(raw).__name__}, not a mapping of fields"}
    status = raw.get("status")
    if status not in WORKER_STATUSES:
        return {"status": "error",
                "message": f"worker sent status {short_repr(status)}, not one of {WORKER_STATUSES}"}
    out = {"status": status}
    try:
        for key, check in _CHECKS.items():
            if key in raw:
                out[key] = check(raw[key])
        if stderr := out.get("stderr_ha"):
            if stderr < 0:
                raise Breach(f"stderr_ha = {stderr!r}: negative")
        if needs_energy and status == "ok" and out.get("energy_ha") is None:
            raise Breach(f"status {status} without an energy")
    except Breach as exc:
        return {"status": "invalid", "seconds": out.get("seconds", 0.0),
                "message": f"worker result rejected: {exc}"}
    return out


# -- progress records (worker -> parent while a method runs) -------------------------------

#: First byte of a progress record on a worker's pipe; a final answer is JSON and starts with ``{``.
PROGRESS_TAG = b"~"
MAX_PROGRESS_BYTES = 1024
MAX_STAGE_CHARS = 60


def encode_progress(record: dict) -> bytes:
    """A :func:`benchsuite.methods.base.report_progress` record for the pipe (checked, bounded)."""
    return PROGRESS_TAG + json.dumps(checked_progress(record)).encode()


def is_progress(data: bytes) -> bool:
    return data[:1] == PROGRESS_TAG


def checked_progress(raw) -> dict:
    """The displayable part of a progress record; anything out of range or mistyped is dropped
    (a progress record is advice, never an error)."""
    if not isinstance(raw, dict):
        return {}
    out = {}
    it = raw.get("iteration")
    if isinstance(it, numbers.Integral) and not isinstance(it, bool) and 0 <= it <= MAX_ITERATIONS:
        out["iteration"] = int(it)
    for key, bound in (("energy_ha", MAX_ABS_ENERGY_HA), ("gradient_norm", MAX_RESOURCE_VALUE)):
        value = raw.get(key)
        if isinstance(value, numbers.Real) and not isinstance(value, bool) and math.isfinite(value) \
                and abs(value) <= bound and (key != "gradient_norm" or value >= 0):
            out[key] = float(value)
    stage = raw.get("stage")
    if isinstance(stage, str) and stage.isprintable():
        out["stage"] = stage[:MAX_STAGE_CHARS]
    return out


def decode_progress(data: bytes) -> dict:
    """Parse a progress record received by the parent; malformed or oversize -> ``{}``."""
    if len(data) > MAX_PROGRESS_BYTES + len(PROGRESS_TAG):
        return {}
    try:
        return checked_progress(json.loads(data[len(PROGRESS_TAG):]))
    except (ValueError, UnicodeDecodeError, RecursionError):
        return {}
