"""Tallowick against benchsuite's references: `pytest --bs-suite smoke` (the plugin ships with benchsuite)."""

from tallowick.adapter import TallowickMethod


def test_tallowick_energy(bs_problem, bs_accuracy):
    solver = TallowickMethod()
    options = {o.name: o.default for o in solver.options}
    bs_accuracy(solver.run(bs_problem.problem, options), method="tallowick", options=options)
