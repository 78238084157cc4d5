"""The worker's problem figures through the parent's contract check: a count the metrics leave null
(QWC groups past qubit.metrics.MAX_GROUPING_STRINGS) passes as null; a wrong type is still a breach."""

from __future__ import annotations

import pytest

from benchsuite.runner import contract

REFUSAL = {"status": "error", "seconds": 0.1, "message": "register of 120 qubits: this method holds a state"}


def test_null_group_count_is_accepted():
    fields = contract.checked_fields({**REFUSAL, "problem": {"n_qubits": 120, "n_terms": 2048520,
                                                              "qwc_groups": None, "one_norm_ha": 5939.45}}, True)
    assert fields["status"] == "error" and fields["problem"]["qwc_groups"] is None
    assert fields["problem"]["n_terms"] == 2048520


@pytest.mark.parametrize("bad", ["12", 1.5, -3, True])
def test_mistyped_group_count_is_invalid(bad):
    fields = contract.checked_fields({**REFUSAL, "problem": {"qwc_groups": bad}}, True)
    assert fields["status"] == "invalid" and "problem.qwc_groups" in fields["message"]
