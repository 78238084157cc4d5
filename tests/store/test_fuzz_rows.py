"""Property-based: whatever values a result row carries, storing it never fails and every table renders.

Hypothesis draws values for the fields a method's result feeds (energy,
iterations, converged, resources, metadata, parameters, message, captured
output) from a wide pool: huge and negative integers, NaN and infinities,
text (control characters, lone surrogates, LaTeX and HTML), bytes, sets,
arbitrary objects, nested containers.  The store must take the row (as it is,
or as ``invalid`` naming the field), read it back through a verified chain,
and the LaTeX, Markdown and CSV tables must render it.
"""

from __future__ import annotations

import dataclasses

from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from benchsuite.report.tables import render_table
from benchsuite.store import ResultStore
from tests.store import sample_row, sample_run

RUN = "r20261201-223015-fuzz"


class Thing:
    """An object no column can hold."""


scalars = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-10**30, max_value=10**30), st.floats(),
    st.text(max_size=30), st.sampled_from([r"\input{/etc/passwd}", "<script>x</script>", "=1+1", "\udc80", "\x00"]),
    st.binary(max_size=8), st.builds(Thing), st.frozensets(st.integers(), max_size=3))
values = st.recursive(scalars, lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner,
                                                                                          max_size=3), max_leaves=8)
CHANGES = st.fixed_dictionaries({}, optional={
    "energy_ha": scalars, "stderr_ha": scalars, "iterations": scalars, "converged": scalars, "seconds": scalars,
    "n_qubits": scalars, "one_norm_ha": scalars, "message": scalars, "captured_output": scalars,
    "resources": st.dictionaries(st.sampled_from(["n_parameters", "two_qubit_gates", "circuit_depth", "shots"]),
                                 values, max_size=4) | values,
    "metadata": values, "parameters": values})


@settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(changes=st.lists(CHANGES, min_size=1, max_size=3))
@example(changes=[{"seconds": float("inf")}])         # found by CI: a non-finite time in a NOT NULL column
@example(changes=[{"seconds": float("nan")}, {"seconds": None}])
def test_any_row_is_stored_and_rendered(tmp_path_factory, changes):
    db = tmp_path_factory.mktemp("fuzz") / "r.sqlite"
    with ResultStore.open(db) as store:
        run = sample_run(RUN)
        store.begin_run(run)
        for i, change in enumerate(changes):
            store.add_result(dataclasses.replace(sample_row(RUN, i), **change))
        rows = store.results(RUN)
    assert len(rows) == len(changes)
    by_key = {r.task_key: r for r in rows}
    for i, change in enumerate(changes):
        row = by_key[sample_row(RUN, i).task_key]
        if row.status == "invalid":          # sample rows are never invalid: the store made it so, saying why
            assert row.verdict == "invalid" and row.message.startswith("stored as invalid")
            assert any(f"{name}: " in row.message for name in change)
            continue
        for name in ("energy_ha", "stderr_ha", "seconds", "one_norm_ha"):
            assert getattr(row, name) is None or isinstance(getattr(row, name), float)
        assert row.iterations is None or isinstance(row.iterations, int) and abs(row.iterations) < 2**63
        assert isinstance(row.resources, dict) and isinstance(row.message, str)
    columns = "case,method,qubits,energy,error,seconds,parameters,two_qubit_gates,depth,shots,one_norm"
    for fmt in ("latex", "markdown", "csv"):
        text, table = render_table(run, rows, fmt, columns)
        assert len(table.values) == len(rows) and text
