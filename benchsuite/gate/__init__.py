"""The run: plan -> execute -> judge -> decide.

* :mod:`benchsuite.gate.plan` -- the selection, methods, options and settings,
  all checked before anything is computed (:class:`RunPlan`);
* :mod:`benchsuite.gate.execute` -- the grid, the store and the outputs;
* :mod:`benchsuite.gate.judge` -- per-task rows and the run's final verdicts;
* :mod:`benchsuite.gate.decision` -- the one gate decision every output renders.

The command line only parses arguments and prints; imports point down to
runner, store and report, never back.
"""
