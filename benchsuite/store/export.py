"""A stored run as a pandas DataFrame, CSV, Parquet or JSON.

:func:`results_dataframe` gives one row per task with flat columns whose names
carry their units (``energy_ha``, ``error_mha``, ``seconds``).  Nested fields
are flattened: ``scf_method``/``scf_converged``/``scf_stable``/``scf_flags``,
``resources_<name>``, and for each reference rung ``<rung>_energy_ha`` and
``<rung>_error_mha`` (the method's error against that rung).  What stays
nested (options, metadata, parameters, published values) is a canonical JSON
string, so every column has one type and Parquet can hold it.

JSON export is ``{"run": <run record>, "chain": {"head_sha256", "rows"},
"results": [<rows>]}`` with the rows exactly as stored (nothing flattened,
``captured_output`` included) and the head of the run's verified hash chain
(:mod:`benchsuite.store.chain`): kept elsewhere, it shows later whether the
stored run is still the one exported.
"""

from __future__ import annotations

import io
import json
import sys
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.store.records import ResultRow, dumps

FORMATS = ("csv", "parquet", "json")

#: Scalar fields copied as they are, in this order.
SCALARS = ("run_id", "task_key", "case", "basis", "encoding", "method", "space", "status", "verdict",
           "energy_ha", "stderr_ha", "reference_method", "reference_energy_ha", "error_mha", "threshold_mha",
           "converged", "iterations", "seconds", "n_qubits", "n_terms", "one_norm_ha", "qwc_groups",
           "scan_parent", "scan_length", "message", "finished_at")
#: Nullable pandas dtypes, so a missing int or bool stays an int or bool column.
DTYPES = {"converged": "boolean", "iterations": "Int64", "n_qubits": "Int64", "n_terms": "Int64",
          "qwc_groups": "Int64", "energy_ha": "float64", "stderr_ha": "float64", "reference_energy_ha": "float64",
          "error_mha": "float64", "threshold_mha": "float64", "seconds": "float64", "one_norm_ha": "float64",
          "scan_length": "float64", "scf_converged": "boolean", "scf_stable": "boolean"}


def _rung_columns(secondary: dict) -> dict:
    flat = {}
    for rung, values in (secondary.get("rungs") or {}).items():
        flat[f"{rung}_energy_ha"] = values.get("energy_ha")
        flat[f"{rung}_error_mha"] = values.get("error_mha")
    return flat


def flat_row(row: ResultRow) -> dict:
    """One row as flat columns (see the module docstring)."""
    flat = {name: getattr(row, name) for name in SCALARS}
    flat["tags"] = ",".join(row.tags)
    flat.update({"options": dumps(row.options), "parameters": None if row.parameters is None
                 else dumps(row.parameters), "metadata": dumps(row.metadata),
                 "published": dumps(row.secondary.get("published", []))})
    flat.update({"scf_method": row.scf.get("method"), "scf_converged": row.scf.get("converged"),
                 "scf_stable": row.scf.get("stable"), "scf_flags": ",".join(row.scf.get("flags") or [])})
    flat.update({f"resources_{k}": v for k, v in sorted(row.resources.items())})
    flat.update(_rung_columns(row.secondary))
    return flat


def results_dataframe(store, run_id: str):
    """The run's results as a DataFrame, one row per task, ordered by task key."""
    return rows_dataframe(store.results(run_id))


def rows_dataframe(rows: list[ResultRow]):
    """Result rows as a DataFrame of flat columns (:func:`flat_row`), typed by :data:`DTYPES`."""
    import pandas as pd

    records = [flat_row(r) for r in rows]
    frame = pd.DataFrame.from_records(records, columns=None if records else list(SCALARS))
    for column, dtype in DTYPES.items():
        if column in frame:
            frame[column] = frame[column].astype(dtype)
    return frame


def render_export(store, run_id: str, fmt: str) -> bytes:
    """The run in ``fmt`` (csv, parquet or json) as bytes."""
    if fmt not in FORMATS:
        raise InputError(f"unknown export format {fmt!r}; choose one of {', '.join(FORMATS)}", field="--format")
    if fmt == "json":
        doc = {"run": store.get_run(run_id).to_json_dict(), "chain": store.chain(run_id),
               "results": [r.to_json_dict() for r in store.results(run_id)]}
        return (json.dumps(doc, indent=2, allow_nan=False) + "\n").encode()
    frame = results_dataframe(store, run_id)
    if fmt == "csv":
        return frame.to_csv(index=False).encode()
    return _parquet(frame)


def _parquet(frame) -> bytes:
    try:
        import pyarrow  # noqa: F401
    except ImportError as exc:
        raise InputError("parquet export needs pyarrow (pip install pyarrow)", field="--format") from exc
    buffer = io.BytesIO()
    frame.to_parquet(buffer, index=False)
    return buffer.getvalue()


def export_run(store, run_id: str, fmt: str, out_path=None) -> Path | None:
    """Write the run in ``fmt`` to ``out_path`` (parent folders made), or to standard output if None."""
    data = render_export(store, run_id, fmt)
    if out_path is None:
        sys.stdout.flush()
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
        return None
    out = Path(out_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_bytes(data)
    return out
