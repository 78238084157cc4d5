"""The spin-parity option's labels: new runs write ``sp-dropped``; runs stored before the rename
(``parity+2qr/blocked``, settings field ``two_qubit_reduction``) are still read, matched to a
baseline and resumed without running a stored task twice."""

from __future__ import annotations

from dataclasses import asdict, replace

from benchsuite.gate.execute import stored_keys
from benchsuite.methods.problem import Encoding
from benchsuite.runner import Task
from benchsuite.store.baseline import task_identity
from benchsuite.store.records import task_key


def test_new_label_written_old_label_read():
    enc = Encoding("parity", "blocked", drop_spin_parity_qubits=True)
    assert enc.label == "parity+sp-dropped/blocked"
    assert Encoding.from_label("parity+2qr/blocked") == enc == Encoding.from_label(enc.label)
    assert Encoding.from_label("parity+2qr+tapered/blocked") == replace(enc, taper=True)
    old_fields = {"name": "parity", "ordering": "blocked", "taper": False, "two_qubit_reduction": True}
    assert Encoding.from_fields(old_fields) == enc == Encoding.from_fields(asdict(enc))


class _Row:
    def __init__(self, encoding):
        self.case, self.basis, self.space, self.method, self.encoding = "h2", "sto-3g", "full", "m", encoding


def test_baseline_identity_matches_across_the_rename():
    assert task_identity(_Row("parity+2qr/blocked")) == task_identity(_Row("parity+sp-dropped/blocked"))
    assert task_identity(_Row("parity/blocked")) != task_identity(_Row("parity+sp-dropped/blocked"))


def test_resumed_legacy_run_keeps_its_task_keys(registry):
    case = registry.case("h2")
    enc = Encoding("parity", "blocked", drop_spin_parity_qubits=True)
    task = Task(case, case.default_basis, enc, "exact-sector", {},
                task_key("h2", case.default_basis.label, enc.label, "exact-sector", {}))
    (old,) = stored_keys([task], "parity+2qr/blocked")
    assert old.key == task_key("h2", case.default_basis.label, "parity+2qr/blocked", "exact-sector", {})
    assert old.key != task.key and old.encoding.label == "parity+sp-dropped/blocked"
    assert stored_keys([task], enc.label) == [task]
