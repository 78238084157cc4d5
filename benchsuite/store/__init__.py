"""Results store: runs and per-task results in SQLite, with provenance and export.

Plain data in, plain data out (no PySCF, no OpenFermion).  Energies in
hartree, errors and thresholds in millihartree, times in seconds.

* :class:`ResultStore` (:mod:`.db`): the database, its schema and migrations.
* :class:`RunRecord`, :class:`ResultRow`, :func:`task_key` (:mod:`.records`).
* :func:`results_dataframe`, :func:`export_run` (:mod:`.export`, imported on
  first use: it needs pandas).
* :mod:`.provenance`: package versions, git state, machine, run ids.
"""

from benchsuite.store.db import SCHEMA_VERSION, ResultStore, default_db_path
from benchsuite.store.records import ResultRow, RunRecord, task_key

__all__ = ["SCHEMA_VERSION", "ResultRow", "ResultStore", "RunRecord", "default_db_path", "export_run",
           "render_export", "results_dataframe", "task_key"]

_LAZY = ("export_run", "render_export", "results_dataframe")


def __getattr__(name):
    if name in _LAZY:
        from benchsuite.store import export

        return getattr(export, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
